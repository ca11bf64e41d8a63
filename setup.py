"""Build step: ship the demo study and its base config inside the package.

``studies/`` and ``configs/`` stay the only copies in the source tree; a build copies the
files named in ``EXAMPLES`` (keeping their relative layout, so ``extends: ../configs/...``
still resolves) to ``searcher/examples/`` in the wheel, where ``searcher demo`` finds them
from any folder.  Everything else is in ``pyproject.toml``.
"""
import shutil
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py

EXAMPLES = ("studies/demo.yaml", "studies/demo-narrow.yaml", "configs/flows-base.yaml")


class BuildWithExamples(build_py):
    def run(self):
        super().run()
        here = Path(__file__).resolve().parent
        for rel in EXAMPLES:
            target = Path(self.build_lib) / "searcher" / "examples" / rel
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(here / rel, target)


setup(cmdclass={"build_py": BuildWithExamples})
