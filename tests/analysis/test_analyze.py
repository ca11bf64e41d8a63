"""analyze() end to end on synthetic stores, degenerate studies, MLflow parent run."""
from __future__ import annotations

import json

import numpy as np
import optuna
import pytest

from searcher.analysis import GOOD_LABEL, analyze
from searcher.testing._planted import add_trial, planted_study


def _journal(path):
    return optuna.storages.JournalStorage(optuna.storages.journal.JournalFileBackend(str(path)))


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("analyze")
    store, kinds = planted_study(n=120, rare=6, seed=0, storage=_journal(tmp / "study.journal"))
    reopened = optuna.load_study(study_name="planted", storage=_journal(tmp / "study.journal"))
    return analyze(None, reopened, tmp / "analysis"), kinds, tmp


def test_groups_and_good_group(result):
    res, kinds, _ = result
    deep = [i for i, k in enumerate(kinds) if k == "deep"]
    good = res["good_group"]
    assert good["label"] == GOOD_LABEL and good["trials"] == deep
    assert "median best level is lowest" in good["rule"]
    assert res["groups"][0]["label"] == GOOD_LABEL
    # derived: planted_study(n=120) writes 120 trials; every one lands in one group
    assert sum(g["size"] for g in res["groups"]) == 120
    assert res["counts"]["pruned"] > 0 and res["counts"]["completed"] > 0
    assert sum(res["counts"].values()) == 120


def test_traits_rules_importance_in_result(result):
    res, _, _ = result
    names = {(t["parameter"], t["value"]) for t in res["traits"] if t["q"] < 0.05}
    assert ("model.hidden.lmax", "2") in names
    assert res["rules"] and "→" in res["rules"][0]["rule"]
    assert res["importance"]["reaching_top"] and res["importance"]["global_variance"]


def test_files_and_summary(result):
    res, _, tmp = result
    out = tmp / "analysis"
    for name in ("analysis.json", "curve-groups.png", "traits.png", "importance.png"):
        assert (out / name).stat().st_size > 0
    stored = json.loads((out / "analysis.json").read_text())
    assert stored["good_group"]["trials"] == res["good_group"]["trials"]
    text = res["summary"]
    assert "Good group: 'converges deep'" in text and "PED-ANOVA" in text and "fANOVA" in text
    assert "validated against experiments" in text
    assert len(text.splitlines()) < 40    # readable at a glance (common practice: one screen)


def test_too_few_trials(tmp_path):
    store = optuna.create_study()
    for i in range(5):
        add_trial(store, 0.5 * np.arange(1, 6) ** -0.5, {"model.hidden.lmax": 1}, "completed")
    res = analyze(None, store, tmp_path)
    assert res["groups"] == [] and res["good_group"] is None
    # 8 trials: the analysis' floor (searcher/analysis/_importance.py), 5 given here
    assert "at least 8" in res["message"] and "none are claimed" in res["message"]


def test_all_failed(tmp_path):
    store = optuna.create_study()
    for _ in range(10):
        add_trial(store, [], {"model.hidden.lmax": 2}, "rejected")
    res = analyze(None, store, tmp_path)
    assert res["good_group"] is None and "every trial failed or was rejected" in res["message"]
    assert res["counts"]["rejected"] == 10  # derived: the loop above adds 10 rejected trials


def test_no_distinct_good_group(tmp_path):
    rng = np.random.default_rng(0)
    store = optuna.create_study()
    for _ in range(30):
        curve = 0.3 * np.arange(1, 13) ** -0.5 * np.exp(rng.normal(0, 0.02, 12))
        add_trial(store, curve, {"model.hidden.lmax": int(rng.integers(1, 4))}, "completed")
    res = analyze(None, store, tmp_path)
    assert res["good_group"] is None and res["traits"] == [] and res["rules"] == []
    assert "no distinct good group" in res["message"] and GOOD_LABEL not in res["summary"]


def test_logs_to_the_study_parent_run(tmp_path):
    from mlflow.tracking import MlflowClient

    uri = f"sqlite:///{tmp_path / 'mlflow.db'}"
    client = MlflowClient(tracking_uri=uri)
    exp = client.create_experiment("planted", artifact_location=(tmp_path / "art").as_uri())
    client.create_run(exp, tags={"searcher.role": "trial", "searcher.study": "planted"})
    parent = client.create_run(exp, tags={"searcher.role": "study", "searcher.study": "planted"})
    store, _ = planted_study(n=40, rare=3, seed=1)
    res = analyze(None, store, tmp_path / "analysis", mlflow_uri=uri)
    assert res["parent_run"] == parent.info.run_id
    logged = {f.path for f in client.list_artifacts(parent.info.run_id, "analysis")}
    assert "analysis/analysis.json" in logged and "analysis/curve-groups.png" in logged
