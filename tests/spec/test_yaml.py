"""The positional YAML reader and the safe derived-expression evaluator."""
from __future__ import annotations

import pytest
import yaml

from searcher.errors import UserError
from searcher.spec._derive import DeriveError, Expression
from searcher.spec._yaml import read_yaml

TEXT = """\
base: &shared
  layers: 2
  width: 16
model:
  <<: *shared
  width: 32
list: [1, 2.5, "x", null, true]
when: 2024-05-01
"""


def test_same_data_as_safe_load_with_positions(tmp_path):
    path = tmp_path / "a.yaml"
    path.write_text(TEXT)
    doc = read_yaml(path)
    expected = yaml.safe_load(TEXT)  # reference: PyYAML's own safe loader
    expected["when"] = "2024-05-01"   # dates stay text (JSON-friendly), as written
    assert doc.data == expected
    assert doc.values[("model", "width")].line == 6 and doc.values[("model", "width")].column == 10
    assert doc.keys[("list",)].line == 7 and doc.values[("list", 2)].column == 16


def test_empty_file_is_an_empty_mapping(tmp_path):
    (tmp_path / "e.yaml").write_text("# nothing\n")
    assert read_yaml(tmp_path / "e.yaml").data == {}


@pytest.mark.parametrize("text, line, column, phrase", [
    ("- 1\n- 2\n", 1, 1, "mapping of sections"),
    ("a: !!set {x}\n", 1, 4, "is not allowed"),
    ("a: !custom 3\n", 1, 4, "is not allowed"),
    ("a: 1\n---\nb: 2\n", 2, 1, "YAML syntax error"),
    ("a: *nowhere\n", 1, 4, "YAML syntax error"),
    ("a:\n  b: 1\n \t c: 2\n", 3, 2, "tab in indentation"),
])
def test_refused(tmp_path, text, line, column, phrase):
    path = tmp_path / "bad.yaml"
    path.write_text(text)
    with pytest.raises(UserError) as info:
        read_yaml(path)
    problem = info.value.problems[0]
    assert (problem.line, problem.column) == (line, column) and phrase in problem.message


def test_missing_file_is_a_user_error(tmp_path):
    with pytest.raises(UserError, match="cannot read file"):
        read_yaml(tmp_path / "nope.yaml")


@pytest.mark.parametrize("text, env, value", [
    ("max(model.hidden.lmax, 2) + 1", {"model.hidden.lmax": 3}, 4),
    ("round(a.b / 3) * 2 ** 2 - 7 // 2 % 2", {"a.b": 10}, 11),
    ("int(abs(-x.y)) + min(1, 2.5)", {"x.y": 2.7}, 3),
])
def test_expressions(text, env, value):
    # reference: Python's own arithmetic on the same numbers
    assert Expression(text).evaluate(env) == value


@pytest.mark.parametrize("text, phrase", [
    ("__import__('os')", "not allowed"), ("a.b(1)", "not allowed"), ("x if y else z", "not allowed"),
    ("max", "is a function"), ("1 +", "syntax error"), ("'text'", "only numbers"),
    ("lambda: 1", "not allowed"), ("a[0]", "not allowed")])
def test_expressions_refused(text, phrase):
    with pytest.raises(DeriveError, match=phrase):
        Expression(text)


def test_evaluation_guards():
    with pytest.raises(DeriveError, match="too large"):
        Expression("10 ** 10 ** 10").evaluate({})
    with pytest.raises(DeriveError, match="division by zero"):
        Expression("1 / (a.b - 1)").evaluate({"a.b": 1})
    with pytest.raises(DeriveError, match="not a number"):
        Expression("model.family + 1").evaluate({"model.family": "gated"})
