"""Mutated study files: each is valid (exit 0) or a located error (exit 2), never a crash."""
from __future__ import annotations

import copy

import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from searcher.testing import tiny_study_doc

from ._harness import assert_read_or_located, run_cli

ODD = st.one_of(
    st.none(), st.booleans(), st.integers(min_value=-2 ** 70, max_value=2 ** 70),
    st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=20),
    st.just("\u202e\u0000x"), st.just("ÿ" * 300), st.lists(st.integers(), max_size=3),
    st.dictionaries(st.text(max_size=5), st.integers(), max_size=2))


def _paths(doc, prefix=()):
    for key, value in doc.items():
        yield prefix + (key,)
        if isinstance(value, dict):
            yield from _paths(value, prefix + (key,))


BASE = tiny_study_doc()
PATHS = sorted(_paths(BASE))


def _nest(depth: int):
    value = 1
    for _ in range(depth):
        value = {"x": value}
    return value


@st.composite
def mutated(draw):
    doc = copy.deepcopy(BASE)
    for _ in range(draw(st.integers(1, 4))):
        path = draw(st.sampled_from(PATHS))
        parent = doc
        for key in path[:-1]:
            parent = parent.get(key) if isinstance(parent, dict) else None
        if not isinstance(parent, dict):
            continue
        action = draw(st.sampled_from(["delete", "swap", "huge", "nest", "unicode_key"]))
        if action == "delete":
            parent.pop(path[-1], None)
        elif action == "swap":
            parent[path[-1]] = draw(ODD)
        elif action == "huge":
            parent[path[-1]] = draw(st.sampled_from([10 ** 40, -10 ** 40, 1e308, 2 ** 63]))
        elif action == "nest":
            parent[path[-1]] = _nest(draw(st.integers(5, 200)))
        else:
            parent[draw(st.text(min_size=1, max_size=8))] = draw(ODD)
    text = yaml.safe_dump(doc, sort_keys=False, allow_unicode=True)
    if draw(st.booleans()):  # anchors and aliases, including a many-times-reused one
        text = "defs: &a {lmax: 1, multiplicity: 2}\n" + text.replace(
            "hidden:\n", "hidden: *a\nhidden_was:\n", 1)
    if draw(st.integers(0, 9)) == 0:  # text-level damage: cut the file anywhere
        text = text[:draw(st.integers(0, len(text)))]
    return text


@settings(max_examples=200, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(mutated())
def test_mutated_study_is_valid_or_a_located_error(text):
    assert_read_or_located("fuzzed.yaml", lambda path: path.write_text(text, encoding="utf-8"),
                           ["check", "{path}", "--samples", "1"])


def _laughs(levels: int) -> str:
    lines = ['x0: &x0 ["lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol"]']
    lines += [f"x{i}: &x{i} [" + ", ".join([f"*x{i - 1}"] * 9) + "]" for i in range(1, levels)]
    return "\n".join(lines) + "\n"


def test_alias_bombs_and_self_reference_are_refused_quickly(tmp_path):
    # "billion laughs": 9 levels of 9 aliases expand to 9^9 values (common practice)
    for name, text in (("laughs.yaml", _laughs(9) + yaml.safe_dump(BASE)),
                       ("itself.yaml", "study: &a\n  name: x\n  more: *a\n")):
        path = tmp_path / name
        path.write_text(text)
        code, out = run_cli(["check", str(path)])
        assert code == 2 and "Traceback" not in out and f"{name}:" in out, out
