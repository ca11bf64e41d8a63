"""Nothing in a study file or checkpoint executes code; study names stay in their folder.

HTML escaping of user text is tested with the report: tests/report/test_html.py.
"""
from __future__ import annotations

import re
from pathlib import Path

import pytest
import yaml

from searcher.cli import main
from searcher.testing import tiny_study_doc

PACKAGE = Path(__file__).resolve().parents[2] / "searcher"
BASE = tiny_study_doc()


def test_every_torch_load_uses_weights_only():
    calls = []
    for path in PACKAGE.rglob("*.py"):
        text = path.read_text()
        for match in re.finditer(r"torch\.load\(", text):
            end = text.find("\n\n", match.start())
            call = text[match.start():end if end > 0 else None].split(")\n")[0]
            calls.append((path.name, "weights_only=True" in call))
    assert calls and all(ok for _, ok in calls), calls


def test_object_tags_are_refused_and_never_run(tmp_path, capsys):
    marker = tmp_path / "ran"
    doc = yaml.safe_dump(BASE, sort_keys=False).replace(
        "study:\n  name: tiny\n",
        f"study:\n  name: tiny\n  summary: !!python/object/apply:os.system ['touch {marker}']\n")
    path = tmp_path / "tagged.yaml"
    path.write_text(doc)
    assert main(["run", str(path), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "tagged.yaml:3:" in err and "not allowed" in err
    assert not marker.exists() and not (tmp_path / "out").exists()


@pytest.mark.parametrize("name", ["../escape", "/abs/olute", "a\x00b", "..", "sub/dir"])
def test_study_name_cannot_leave_the_output_folder(tmp_path, capsys, name):
    doc = dict(BASE, study={"name": name}, output={"folder": str(tmp_path / "runs" / "x")})
    path = tmp_path / "named.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    assert main(["run", str(path)]) == 2
    err = capsys.readouterr().err
    assert "study.name" in err and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["named.yaml"]  # nothing made
