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


def test_a_caught_and_a_surviving_mutant_in_a_tiny_tree(tmp_path):
    import subprocess

    from searcher.testing._mutants import Mutant, run_mutants

    (tmp_path / "mod.py").write_text("VALUE = 1\n")
    (tmp_path / "test_mod.py").write_text("from mod import VALUE\n\n\ndef test_value():\n"
                                          "    assert VALUE == 1\n")
    (tmp_path / "test_other.py").write_text("def test_nothing_about_mod():\n    assert True\n")
    subprocess.run(["git", "init", "-q"], cwd=tmp_path, check=True)
    caught = Mutant("caught", "p", "mod.py", "VALUE = 1", "VALUE = 2", ("test_mod.py",))
    missed = Mutant("missed", "p", "mod.py", "VALUE = 1", "VALUE = 2", ("test_other.py",))
    code, rows = run_mutants(tmp_path, (caught, missed), echo=lambda line: None)
    assert code == 1 and [r["result"] for r in rows] == ["caught", "survived"]
    assert (tmp_path / "mod.py").read_text() == "VALUE = 1\n"  # the real tree is untouched
    assert run_mutants(tmp_path, (caught,), echo=lambda line: None)[0] == 0
