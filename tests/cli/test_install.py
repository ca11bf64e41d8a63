"""The built wheel is a working tool outside the source tree.

The wheel is built offline from a copy of the tree (``pip wheel --no-build-isolation``),
installed into a throw-away folder, and run from an empty folder with only that folder and
the environment's dependencies on the path: ``check`` on a study written there, then the
quick demo, shortened with ``--trials``/``--epochs``, to the end.
"""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest
import yaml

ROOT = Path(__file__).resolve().parents[2]
SKIP = shutil.ignore_patterns(".git", ".venv", "runs", "build", "__pycache__", "*.egg-info",
                              ".pytest_cache", ".hypothesis", "mlruns", ".helpers")


def _run(args, cwd, env, timeout=900):
    done = subprocess.run([sys.executable, *args], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=timeout)
    assert done.returncode == 0, f"{args}: {done.stdout[-3000:]}\n{done.stderr[-3000:]}"
    return done.stdout


@pytest.mark.slow
def test_wheel_installs_and_runs_from_an_empty_folder(tmp_path):
    src = tmp_path / "src"
    shutil.copytree(ROOT, src, ignore=SKIP)
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    env.update(OMP_NUM_THREADS="1", PIP_NO_INDEX="1")
    _run(["-m", "pip", "wheel", ".", "--no-deps", "--no-build-isolation", "-q",
          "-w", str(tmp_path / "wheel")], src, env)
    wheel, = (tmp_path / "wheel").glob("searcher-*.whl")
    names = set(zipfile.ZipFile(wheel).namelist())
    for rel in ("studies/demo.yaml", "studies/demo-narrow.yaml", "configs/flows-base.yaml"):
        # the shipped copies are the source tree's files, byte for byte
        assert zipfile.ZipFile(wheel).read(f"searcher/examples/{rel}") == (ROOT / rel).read_bytes()
    assert "searcher/spec/defaults.yaml" in names
    # the compiled kernel's source, so an installed tool builds it too
    assert zipfile.ZipFile(wheel).read("searcher/models/_kernel.cpp") == \
        (ROOT / "searcher/models/_kernel.cpp").read_bytes()
    site = tmp_path / "site"
    _run(["-m", "pip", "install", "--no-deps", "-q", "--target", str(site), str(wheel)],
         tmp_path, env)

    here = tmp_path / "empty"
    here.mkdir()
    env["PYTHONPATH"] = str(site)
    where = _run(["-c", "import searcher; print(searcher.__file__)"], here, env)
    assert Path(where.strip()).is_relative_to(site)      # the installed copy, not the tree
    assert _run(["-m", "searcher", "--version"], here, env).startswith("searcher 0.1.0")
    study = {"study": {"name": "mine"}, "task": {"source": "demo", "demo": {"samples": 12}},
             "model": {"hidden": {"multiplicity": {"whole": [4, 8], "step": 4}}}}
    (here / "mine.yaml").write_text(yaml.safe_dump(study))
    out = _run(["-m", "searcher", "check", "mine.yaml"], here, env)
    assert "model.hidden.multiplicity" in out

    out = _run(["-m", "searcher", "demo", "--quick", "--trials", "4", "--epochs", "2",
                "--plain"], here, env)
    assert "demo finished" in out
    assert str(site / "searcher" / "examples" / "studies" / "demo.yaml") in out
    done = here / "runs" / "demo-quick"
    assert (done / "study.journal").is_file() and (done / "dossier").is_dir()
    assert (done / "analysis").is_dir()
    written = yaml.safe_load((done / "study.yaml").read_text())
    assert written["search"]["budget"]["trials"] == 4 and written["training"]["epochs"] == 2
