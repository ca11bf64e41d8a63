"""A study is named by its own file unless it says otherwise; a base never passes its name on."""
from __future__ import annotations

from pathlib import Path

import pytest
import yaml

from searcher.errors import UserError
from searcher.spec import load_study
from searcher.testing import tiny_study_doc

ROOT = Path(__file__).resolve().parents[2]


def _write(path: Path, doc: dict) -> Path:
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return path


def test_a_study_without_a_name_takes_its_file_stem(tmp_path):
    doc = tiny_study_doc()
    del doc["study"]
    study = load_study(_write(tmp_path / "my-first.yaml", doc))
    assert study.name == "my-first" and study.output_dir == Path("runs/my-first")
    assert study.fixed()["study"]["name"] == "my-first"


def test_extending_the_demo_does_not_make_the_demo(tmp_path):
    demo = ROOT / "studies" / "demo.yaml"
    path = _write(tmp_path / "mine.yaml", {"extends": str(demo),
                                           "search": {"budget": {"trials": 2}}})
    study = load_study(path)
    assert load_study(demo).name == "demo"
    assert study.name == "mine" and study.output_dir == Path("runs/mine")


def test_an_explicit_name_wins_and_a_bad_stem_is_located(tmp_path):
    assert load_study(_write(tmp_path / "x.yaml", tiny_study_doc())).name == "tiny"
    doc = tiny_study_doc()
    del doc["study"]
    with pytest.raises(UserError) as err:
        load_study(_write(tmp_path / "has space.yaml", doc))
    (p,) = err.value.problems
    assert p.path == "study.name" and p.file.endswith("has space.yaml")
    assert "set study.name" in p.message
