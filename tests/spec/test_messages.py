"""First-run messages: each names what is allowed, and nothing that does not apply is checked."""
from __future__ import annotations

import pytest
import yaml

from searcher.errors import Problem, UserError
from searcher.spec import load_study
from searcher.testing import tiny_study_doc


def _load(tmp_path, doc):
    path = tmp_path / "m.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return load_study(path)


def _problem(tmp_path, doc) -> Problem:
    with pytest.raises(UserError) as err:
        _load(tmp_path, doc)
    (p,) = err.value.problems
    return p


def test_a_mistyped_dimension_keyword_names_the_forms(tmp_path):
    doc = tiny_study_doc(model={"layers": {"whle": [1, 3]}})
    p = _problem(tmp_path, doc)
    assert p.path == "model.layers" and p.line > 0
    assert "one_of, whole, real, derive" in p.message and "did you mean 'whole'" in p.message
    assert "{'whle'" not in p.message


def test_the_unknown_top_level_key_message_lists_extends(tmp_path):
    doc = {**tiny_study_doc(), "extend": "base.yaml"}
    p = _problem(tmp_path, doc)
    assert "did you mean 'extends'" in p.message and "extends" in p.message.split("allowed")[1]


def test_no_pruner_means_no_pruner_budget(tmp_path):
    # 20 > training.epochs 4, but "none" and "median" read no epoch budget
    for kind in ("none", "median"):
        _load(tmp_path, tiny_study_doc(search={"pruner": {"kind": kind, "max_epochs": 20}}))
    p = _problem(tmp_path, tiny_study_doc(search={"pruner": {"kind": "hyperband",
                                                             "max_epochs": 20}}))
    assert p.path == "search.pruner.max_epochs"


def test_outlook_needs_a_window_of_two_epochs(tmp_path):
    # OutlookPruner refuses min_epochs == max_epochs; the spec says so first, with the key
    same = {"min_epochs": 3, "max_epochs": 3}
    p = _problem(tmp_path, tiny_study_doc(search={"pruner": {"kind": "outlook", **same}}))
    assert p.path == "search.pruner.min_epochs" and "below max_epochs 3" in p.message
    _load(tmp_path, tiny_study_doc(search={"pruner": {"kind": "hyperband", **same}}))


def test_a_problem_without_a_file_prints_no_placeholder():
    assert Problem("must be at least 1", path="--finalists").render() == \
        "[--finalists] must be at least 1"
    assert Problem("bad", file="s.yaml", line=3, column=2, path="a.b").render() == \
        "s.yaml:3:2: [a.b] bad"
