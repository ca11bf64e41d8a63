"""A new user's first runs: no silent joining of another space, a version, honest status."""
from __future__ import annotations

import pytest
import yaml

from searcher.cli import main
from searcher.search import open_store
from searcher.spec import load_study
from searcher.testing import tiny_study_doc


def _study_file(tmp_path, name="s", **over):
    doc = tiny_study_doc(output={"folder": str(tmp_path / "out")}, **over)
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return path


def test_run_refuses_a_changed_space_under_an_existing_name(tmp_path, capsys):
    first = _study_file(tmp_path, "a")
    open_store(load_study(first))                       # the store now holds study "tiny"
    changed = _study_file(tmp_path, "b", training={"learning_rate": {"real": [0.001, 0.1],
                                                                     "log": True}})
    assert main(["run", str(changed), "--plain"]) == 2
    err = capsys.readouterr().err
    assert "different search space" in err and "--new-space" in err and "study.name" in err
    assert "Traceback" not in err
    # asked for, the new space joins the store, which then records it
    opt = open_store(load_study(changed), new_space=True)
    assert opt.user_attrs["study_hash"] == load_study(changed).hash
    assert opt.user_attrs["earlier_hashes"] == [load_study(first).hash]
    open_store(load_study(changed))                     # the same file again: no refusal


def test_version_exits_0(capsys):
    with pytest.raises(SystemExit) as done:
        main(["--version"])
    assert done.value.code == 0 and capsys.readouterr().out.startswith("searcher ")


def test_status_of_a_study_that_never_ran_says_so(tmp_path, capsys):
    path = _study_file(tmp_path, "fresh")
    assert main(["status", str(path)]) == 1
    err = capsys.readouterr().err
    assert "has never run" in err and "searcher run" in err
    assert not (tmp_path / "out").exists()              # status writes nothing


def test_compare_with_one_study_says_it_needs_two_first(tmp_path, capsys):
    path = _study_file(tmp_path, "alone")               # never run: no journal either
    assert main(["compare", str(path)]) == 2
    err = capsys.readouterr().err
    assert "two or more study files" in err and "journal" not in err
