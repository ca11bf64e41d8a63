"""Names a study may carry from before a rename give a located error naming the new ones."""
from __future__ import annotations

import pytest
import yaml

from searcher.errors import UserError
from searcher.spec import load_study
from searcher.spec._schema import json_schema
from searcher.testing import tiny_study_doc


def _problems(tmp_path, **over):
    path = tmp_path / "s.yaml"
    path.write_text(yaml.safe_dump(tiny_study_doc(**over), sort_keys=False))
    with pytest.raises(UserError) as err:
        load_study(path)
    return err.value.problems


def test_old_pruner_kind_names_the_new_one(tmp_path):
    (p,) = _problems(tmp_path, search={"pruner": {"kind": "curve_fit"}})
    assert p.path == "search.pruner.kind" and p.line > 0
    assert "'outlook'" in p.message and "renamed" in p.message


def test_old_pruner_option_names_the_new_one(tmp_path):
    (p,) = _problems(tmp_path, search={"pruner": {"threshold": 0.05}})
    assert p.path == "search.pruner.threshold" and p.line > 0
    assert "margin" in p.message and "headroom" in p.message


def test_a_margin_in_decades_says_what_margin_means_now(tmp_path):
    (p,) = _problems(tmp_path, search={"pruner": {"kind": "outlook", "margin": 1.0}})
    assert p.path == "search.pruner.margin" and "headroom" in p.message


def test_schema_and_defaults_carry_no_old_name():
    from pathlib import Path

    import searcher.spec

    text = (Path(searcher.spec.__file__).parent / "defaults.yaml").read_text()
    schema = str(json_schema())
    for old in ("curve_fit", "threshold"):
        assert old not in text and old not in schema
    assert "outlook" in schema and "headroom" in schema
