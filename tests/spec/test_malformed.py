"""Every malformed study gives located problems: file, line, column, dotted key, rule."""
from __future__ import annotations

from pathlib import Path

import pytest

from searcher.errors import UserError
from searcher.spec import load_study

HERE = Path(__file__).parent / "malformed"

# file -> list of (line, column or None, dotted key, phrase of the message); lines and
# columns are counted by hand in each file (1-based, as editors show them).
EXPECTED = {
    "syntax.yaml": [(5, 9, "", "YAML syntax error")],
    "tab.yaml": [(4, 1, "", "tab in indentation")],
    "duplicate_key.yaml": [(6, 3, "model.layers", "duplicate key 'layers'; it was already given at line 4")],
    "unknown_key.yaml": [(5, 3, "model.layres", "did you mean 'layers'?")],
    "wrong_type.yaml": [(5, 11, "training.epochs", "got 'ten'; allowed: a whole number >= 1")],
    "inverted_range.yaml": [(4, 19, "model.layers", "inverted range [3, 1]")],
    "empty_choice.yaml": [(4, 20, "model.family", "one_of needs a non-empty list")],
    "log_nonpositive.yaml": [(4, 25, "training.learning_rate", "log range needs lo > 0")],
    "bad_step.yaml": [(5, 34, "model.radial.count", "step 2 does not divide the range [4, 9]")],
    "irreps_parity_letter.yaml": [(5, 13, "model.hidden.irreps", "term '4x1y' is not of the form")],
    "irreps_zero_mult.yaml": [(5, 13, "model.hidden.irreps", "multiplicity must be at least 1")],
    "irreps_high_order.yaml": [(5, 13, "model.hidden.irreps", "order l must be at most 8")],
    "irreps_no_scalars.yaml": [(5, 13, "model.hidden.irreps", "scalars 0e")],
    "condition_unknown.yaml": [(5, 69, "model.radial.power", "did you mean 'model.radial.envelope'?")],
    "condition_impossible.yaml": [(6, 70, "model.radial.power", "'squared' can never hold")],
    "derive_unknown.yaml": [(5, 20, "model.edge_attrs.lmax", "did you mean 'model.hidden.lmax'?")],
    "derive_cycle.yaml": [(None, None, "", "derive cycle: ")],
    "derive_syntax.yaml": [(5, 20, "model.edge_attrs.lmax", "syntax error")],
    "derive_out_of_range.yaml": [(6, 20, "model.layers", "gives -4; allowed: a whole number in [1, 32]")],
    "extends_cycle.yaml": [(2, 10, "extends", "extends cycle: extends_cycle.yaml -> cycle-base.yaml")],
    "missing_base.yaml": [(5, 5, "extends", "base file 'bases/no-such-base.yaml' not found")],
    "object_tag.yaml": [(3, 12, "study.summary", "python/object/apply:os.system' is not allowed")],
    "bad_name.yaml": [(3, 9, "study.name", "letters, digits, '-' and '_'")],
    "unreachable_order.yaml": [(6, 11, "model.hidden.lmax", "'anisotropy' (2e) is unreachable: 2e")],
    "unreachable_parity.yaml": [(11, 13, "model.hidden.parity", "set model.hidden.parity: both")],
    "node_inputs_subset.yaml": [(5, 38, "model.node_inputs", "not a subset of the input fields")],
    "node_attr_not_vector.yaml": [(5, 20, "model.node_attr_field", "must be a vector input field")],
    "edge_invariant_needs_field.yaml": [(11, 20, "model.edge_invariants", "needs an input field 'pressure'")],
    "pruner_epochs.yaml": [(6, 17, "search.pruner.max_epochs", "exceeds training.epochs (30")],
    "fixed_section_dimension.yaml": [(4, 12, "search.workers", "search keys are fixed")],
    "multiple_errors.yaml": [
        (5, 3, "model.famly", "did you mean 'family'?"),
        (6, 19, "model.layers", "inverted range [4, 2]"),
        (8, 12, "model.hidden.taper", "one of: uniform, tapered, balanced"),
        (10, 25, "training.learning_rate", "log range needs lo > 0"),
    ],
}


def test_every_file_has_an_expectation():
    assert sorted(p.name for p in HERE.glob("*.yaml")) == sorted(EXPECTED)
    assert len(EXPECTED) >= 25


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_located_problem(name):
    with pytest.raises(UserError) as info:
        load_study(HERE / name)
    problems = info.value.problems
    for line, column, path, phrase in EXPECTED[name]:
        hits = [p for p in problems if phrase in p.message and (not path or p.path == path)]
        assert hits, f"{phrase!r} at {path} not in {[p.render() for p in problems]}"
        if line is not None:
            assert any(p.line == line and p.column == column for p in hits), \
                [p.render() for p in hits]
        assert all(p.file for p in hits)


def test_derive_cycle_names_both_keys_and_lines():
    with pytest.raises(UserError) as info:
        load_study(HERE / "derive_cycle.yaml")
    (problem,) = info.value.problems
    assert "model.width" in problem.message and "model.radial.count" in problem.message
    assert (problem.line, problem.path) in {(4, "model.width"), (6, "model.radial.count")}


def test_cycle_points_into_the_base_file():
    with pytest.raises(UserError) as info:
        load_study(HERE / "extends_cycle.yaml")
    assert info.value.problems[0].file.endswith("bases/cycle-base.yaml")


def test_all_problems_of_one_file_in_one_pass():
    with pytest.raises(UserError) as info:
        load_study(HERE / "multiple_errors.yaml")
    lines = [p.line for p in info.value.problems]
    assert {5, 6, 8, 10} <= set(lines) and lines == sorted(lines)
