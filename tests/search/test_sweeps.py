"""Real tiny sweeps: every pruner, tracking consistency, guard rejections, divergence."""
from __future__ import annotations

import math

import optuna
import pytest
from mlflow import MlflowClient

from searcher.search import checkpoint_path, open_store, outcome_of, run_study, study_status
from searcher.spec import load_study
from searcher.train import load_weights

ATTRS = {"config", "study_hash", "data_hash", "outcome", "reason", "best_value", "best_epoch",
         "epochs", "cpu_seconds", "gate", "cost", "mlflow_run_id"}


def _run(path, **kw):
    study = load_study(path)
    return study, run_study(study, live=False, echo=lambda *_: None, **kw)


@pytest.mark.parametrize("pruner", ["none", "median", "percentile", "halving", "hyperband",
                                    "outlook"])
def test_sweep_records_every_trial_consistently(write_study, pruner):
    path = write_study({"search": {"pruner": {"kind": pruner}}}, name=f"sweep-{pruner}")
    study, summary = _run(path)
    assert summary.exit_code == 0 and summary.n_trials == 3  # budget.trials of tiny_study_doc
    trials = open_store(study).get_trials()
    client = MlflowClient(tracking_uri=summary.tracking)
    exp = client.get_experiment_by_name(study.name)
    children = client.search_runs([exp.experiment_id],
                                  filter_string="tags.`searcher.role` = 'trial'")
    # one MLflow child run per Optuna trial, nested under the study's parent run
    assert len(children) == len(trials)
    parent = client.search_runs([exp.experiment_id],
                                filter_string="tags.`searcher.role` = 'study'")[0]
    by_id = {r.info.run_id: r for r in children}
    for t in trials:
        assert t.state.is_finished() and ATTRS <= set(t.user_attrs)
        assert outcome_of(t) in {"completed", "pruned", "rejected"}
        run = by_id[t.user_attrs["mlflow_run_id"]]
        assert run.data.tags["mlflow.parentRunId"] == parent.info.run_id
        assert run.data.tags["searcher.outcome"] == t.user_attrs["outcome"]
        history = client.get_metric_history(run.info.run_id, "val_loss")
        assert len(history) == len(t.intermediate_values)
        assert [m.step for m in sorted(history, key=lambda m: m.step)] == \
            sorted(t.intermediate_values)
        if outcome_of(t) == "completed":
            assert t.value == pytest.approx(min(t.intermediate_values.values()))
        if outcome_of(t) == "pruned":
            assert t.user_attrs["pruned_at"] == max(t.intermediate_values)
    # top-k checkpoints: only the best `keep_best` completed trials keep weights
    done = sorted((t.value, t.number) for t in trials if outcome_of(t) == "completed")
    for rank, (_, number) in enumerate(done):
        # keep_best defaults to 3 (searcher/spec/defaults.yaml, search.keep_best)
        assert checkpoint_path(study.output_dir, number).exists() == (rank < 3)
    if done:
        assert load_weights(checkpoint_path(study.output_dir, done[0][1]))


def test_median_pruner_cuts_a_slow_learner(write_study):
    # the node_mlp baseline: what is tested is the pruner, not the equivariant family
    path = write_study({"model": {"family": "node_mlp"},
                        "search": {"pruner": {"kind": "median", "warmup": 1},
                                   "budget": {"trials": 3}}}, name="median-cut")
    study = load_study(path)
    opt = open_store(study)
    # two quick learners first, then one whose rate is 100x lower (same seeds otherwise)
    for lr in (0.03, 0.03, 0.0003):
        opt.enqueue_trial({"training.learning_rate": lr})
    _, summary = _run(path)
    trials = open_store(study).get_trials()
    assert [outcome_of(t) for t in trials][:2] == ["completed", "completed"]
    # derived: warmup 1 means the median rule is first asked after epoch 2 (n_warmup_steps=2)
    assert outcome_of(trials[2]) == "pruned" and trials[2].user_attrs["pruned_at"] >= 2
    assert summary.counts["pruned"] == 1


def test_guard_rejects_and_records_with_constraints(write_study):
    path = write_study({"search": {"guard": {"max_params": 10}, "budget": {"trials": 2}}},
                       name="guarded")
    study, summary = _run(path)
    trials = open_store(study).get_trials()
    # derived: every candidate has more than 10 parameters, so both of the 2 are rejected
    assert len(trials) == 2 and summary.counts["rejected"] == 2
    for t in trials:
        assert t.state == optuna.trial.TrialState.PRUNED
        assert "exceed the guard of 10" in t.user_attrs["reason"]
        assert t.constraints["params"] > 0 and not t.intermediate_values


def test_absurd_learning_rate_is_recorded_as_diverged(write_study):
    path = write_study({"training": {"learning_rate": 1.0e4, "clip": 0.0},
                        "search": {"budget": {"trials": 1}}}, name="explode")
    study, summary = _run(path)
    (t,) = open_store(study).get_trials()
    assert outcome_of(t) == "diverged" and summary.counts["diverged"] == 1
    # the outcome table of searcher/outcomes.py: diverged = PRUNED with constraint stable = 1
    assert t.constraints["stable"] == 1.0 and "epoch" in t.user_attrs["reason"]
    status = study_status(study)
    assert status["best"] is None and status["counts"]["diverged"] == 1


def test_status_json_keys(write_study):
    path = write_study({"search": {"budget": {"trials": 1}}}, name="status")
    study, _ = _run(path)
    status = study_status(study)
    assert {"counts", "best", "n_trials", "states", "storage"} <= set(status)
    # derived: budget 1, pruner none, so the one trial completes and is the best
    assert status["n_trials"] == 1 and status["states"]["COMPLETE"] == 1
    assert status["best"]["number"] == 0 and math.isfinite(status["best"]["value"])
    assert status["best"]["config"]["model"]["family"] == "gated"


def test_gate_failure_is_rejected_and_never_trained(write_study, monkeypatch):
    # Every build of this sweep is a broken block (a constant on the l = 2 output that a
    # rotation does not move); the search must record it as rejected and train nothing.
    import searcher.models as models
    from searcher.testing import BrokenBias

    real = models.build_model
    monkeypatch.setattr(models, "build_model", lambda *a, **kw: BrokenBias(real(*a, **kw)))
    models.forget_verdicts()  # a verdict kept from another test must not answer for this one
    try:
        path = write_study({"search": {"budget": {"trials": 2}}}, name="gate-fails")
        study, summary = _run(path)
    finally:
        models.forget_verdicts()
    trials = open_store(study).get_trials()
    # derived: budget 2, every build broken, so 2 rejected; the gate constraint is 1 (outcomes.py)
    assert len(trials) == 2 and summary.counts["rejected"] == 2
    for t in trials:
        assert t.state == optuna.trial.TrialState.PRUNED and outcome_of(t) == "rejected"
        assert t.user_attrs["reason"].startswith("equivariance gate: equivariance error")
        assert t.constraints["gate"] == 1.0 and not t.user_attrs["gate"]["passed"]
        assert not t.intermediate_values and t.user_attrs["epochs"] == 0
