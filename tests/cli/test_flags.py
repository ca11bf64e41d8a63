"""The command-line flags no other test drives: run --hours/--until, analyze --audit N,
compare --target/--force, dossier --finalists/--epochs, data inspect --study, demo's study."""
from __future__ import annotations

import json

import numpy as np
import optuna
import pytest
import yaml

from searcher.cli import main
from searcher.cli._demo import QUICK, demo_study_text
from searcher.search import open_store, outcome_of
from searcher.spec import load_study
from searcher.testing import tiny_study_doc
from searcher.testing._planted import add_trial, planted_curves

from tests.analysis.test_audit import TINY
from tests.analysis.test_compare import _study


@pytest.fixture(scope="module")
def ran(tmp_path_factory):
    """A tiny study searched once through the CLI (3 trials, pruner none, 4 epochs)."""
    folder = tmp_path_factory.mktemp("flags")
    doc = tiny_study_doc(study={"name": "flags"}, output={"folder": str(folder / "out")})
    doc["search"]["budget"] = {"trials": 3}
    path = folder / "flags.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    # --hours generous and --until a valid clock time: the budget of 3 trials ends the run.
    assert main(["run", str(path), "--plain", "--hours", "1", "--until", "23:59"]) == 0
    return path


def test_run_hours_and_until(ran, tmp_path, capsys):
    trials = open_store(load_study(ran)).get_trials()
    assert [outcome_of(t) for t in trials] == ["completed"] * 3
    # A deadline 1e-9 h (3.6 µs) after the start has passed before any trial can start
    # (loading the study and its data alone takes far longer): nothing runs, exit 0.
    doc = yaml.safe_load(ran.read_text())
    doc["study"]["name"], doc["output"]["folder"] = "late", str(tmp_path / "late")
    late = tmp_path / "late.yaml"
    late.write_text(yaml.safe_dump(doc, sort_keys=False))
    assert main(["run", str(late), "--plain", "--hours", "1e-9"]) == 0
    assert open_store(load_study(late)).get_trials() == []
    capsys.readouterr()
    assert main(["run", str(late), "--plain", "--until", "25:00"]) == 2
    err = capsys.readouterr().err
    assert "--until" in err and "HH:MM" in err and "'25:00'" in err


def test_dossier_finalists_and_epochs(ran, tmp_path, capsys):
    capsys.readouterr()
    assert main(["dossier", str(ran), "--finalists", "1", "--epochs", "2", "--seeds", "2",
                 "--out", str(tmp_path / "d"), "--json"]) == 0
    content = json.loads(capsys.readouterr().out)
    assert content["settings"]["finalists"] == 1 and content["settings"]["epochs"] == 2
    (finalist,) = [f for f in content["finalists"] if f["role"] == "finalist"]
    assert [run["epochs"] for run in finalist["seeds"]] == [2, 2]
    assert all(run["epochs"] == 2 for f in content["finalists"] for run in f["seeds"])
    assert (tmp_path / "d" / "dossier.json").exists()


def test_data_inspect_with_study(ran, capsys):
    capsys.readouterr()
    assert main(["data", "inspect", "demo", "--study", str(ran), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    # the study's task.demo.samples (8, tiny_study_doc) replaces the default 48
    assert report["stats"]["samples"] == 8


def test_analyze_audit_reruns_n_pruned_trials(tmp_path, capsys):
    path = tmp_path / "tiny.yaml"
    path.write_text(TINY.format(out=tmp_path / "out"))
    study = load_study(path)
    journal = study.output_dir / "study.journal"
    journal.parent.mkdir(parents=True)
    store = optuna.create_study(study_name="tiny", storage=optuna.storages.JournalStorage(
        optuna.storages.journal.JournalFileBackend(str(journal))))
    curves, kinds = planted_curves(n=30, rare=4, seed=0)
    for curve, kind in zip(curves, kinds):
        outcome = "pruned" if curve.size < max(c.size for c in curves) else "completed"
        add_trial(store, curve, {"model.hidden.lmax": 1 + (kind == "deep")}, outcome,
                  config=study.fixed())
    assert main(["analyze", str(path), "--audit", "2", "--json"]) == 0
    audit = json.loads(capsys.readouterr().out)["audit"]
    assert audit["status"] == "done" and audit["reruns"] == 2 and len(audit["chosen"]) == 2
    assert all(np.isfinite(audit["best"]))
    assert main(["analyze", str(path), "--audit", "-1"]) == 2
    assert "--audit" in capsys.readouterr().err


def test_compare_target_and_force(tmp_path, capsys):
    _study(tmp_path, "alpha")
    _study(tmp_path, "other", extra="task:\n  split:\n    seed: 3\n", seed=1)
    pa, po = str(tmp_path / "alpha.yaml"), str(tmp_path / "other.yaml")
    assert main(["compare", pa, po, "--json"]) == 2
    capsys.readouterr()
    assert main(["compare", pa, po, "--force", "--json", "--out", str(tmp_path / "c")]) == 0
    forced = json.loads(capsys.readouterr().out)
    assert any("task.split.seed" in w for w in forced["warnings"])
    assert main(["compare", pa, pa, "--target", "0.5", "--json",
                 "--out", str(tmp_path / "t")]) == 0
    targeted = json.loads(capsys.readouterr().out)
    assert targeted["target"] == 0.5


def test_demo_study_text_quick_and_full(tmp_path):
    from searcher.cli._demo import _demo_file

    full = load_study(_demo_file()).fixed()
    for quick in (False, True):
        folder = tmp_path / f"out-{quick}"
        folder.mkdir()
        path = folder / "study.yaml"  # where `searcher demo` writes it
        path.write_text(demo_study_text(folder, quick))
        fixed = load_study(path).fixed()
        assert fixed["output"]["folder"] == str(folder)
        want = QUICK if quick else {"training": full["training"], "search": full["search"]}
        assert fixed["training"]["epochs"] == want["training"]["epochs"]
        assert fixed["search"]["budget"]["trials"] == want["search"]["budget"]["trials"]
        assert fixed["model"] == full["model"]  # --quick keeps the demo's model space
    assert QUICK["training"]["epochs"] < full["training"]["epochs"]


def test_demo_out_on_a_file_exits_2(tmp_path, capsys):
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    assert main(["demo", "--quick", "--out", str(blocker)]) == 2
    assert "--out" in capsys.readouterr().err
