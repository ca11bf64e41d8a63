"""The mutant list of scripts/mutants cannot rot: every target is still in the source."""
from __future__ import annotations

from pathlib import Path

from searcher.testing._mutants import MUTANTS, check_targets

ROOT = Path(__file__).resolve().parents[2]


def test_every_mutant_target_is_in_the_source_exactly_once():
    assert check_targets(ROOT) == []
    for m in MUTANTS:
        assert m.original != m.replacement and m.tests
        for node in m.tests:  # every catching test file exists
            assert (ROOT / node.split("::")[0]).is_file(), node


def test_a_missing_or_repeated_target_is_reported(tmp_path):
    (tmp_path / "a.py").write_text("x = 1\nx = 1\n")
    from searcher.testing._mutants import Mutant

    twice = Mutant("twice", "p", "a.py", "x = 1", "x = 2", ("t",))
    gone = Mutant("gone", "p", "a.py", "y = 1", "y = 2", ("t",))
    missing = Mutant("missing", "p", "b.py", "x", "y", ("t",))
    problems = check_targets(tmp_path, (twice, gone, missing))
    assert len(problems) == 3
    assert "2 times" in problems[0] and "0 times" in problems[1] and "does not exist" in problems[2]
