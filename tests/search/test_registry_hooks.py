"""register_sampler / register_pruner, trial_seed, and an exact re-run of a stored trial."""
from __future__ import annotations

import optuna
import pytest

from searcher.errors import UserError
from searcher.search import open_store, outcome_of, run_study
from searcher.search._registry import (PRUNERS, SAMPLERS, SEED_STRIDE, make_pruner,
                                       make_sampler, register_pruner, register_sampler)
from searcher.search._train_outside import train_config
from searcher.search._trial import trial_seed
from searcher.spec import load_study


def test_register_sampler_replaces_a_declared_name(monkeypatch):
    monkeypatch.setitem(SAMPLERS, "random", SAMPLERS["random"])  # restored afterwards
    seen = {}

    @register_sampler("random")
    def _mine(study, cfg, seed):
        seen["seed"] = seed
        return optuna.samplers.RandomSampler(seed=seed)

    sampler = make_sampler(None, {"kind": "random"}, seed=7, worker=2)
    assert isinstance(sampler, optuna.samplers.RandomSampler)
    # derived from sampler_seed's rule: seed + worker * 1_000_003, no origin, mod 2**32
    assert seen["seed"] == 7 + 2 * 1_000_003
    with pytest.raises(ValueError, match="searcher/options.py"):
        register_sampler("not-a-sampler")
    with pytest.raises(UserError, match="tpe"):
        make_sampler(None, {"kind": "not-a-sampler"}, seed=0)


def test_register_pruner_replaces_a_declared_name(monkeypatch):
    monkeypatch.setitem(PRUNERS, "median", PRUNERS["median"])

    @register_pruner("median")
    def _mine(cfg):
        return optuna.pruners.ThresholdPruner(upper=float(cfg["upper"]))

    pruner = make_pruner({"kind": "median", "upper": 2.5})
    assert isinstance(pruner, optuna.pruners.ThresholdPruner)
    study = optuna.create_study()
    trial = study.ask()
    trial.report(3.0, 1)  # above the threshold: the registered pruner is the one asked
    assert pruner.prune(study, study.trials[0])
    with pytest.raises(ValueError, match="declared"):
        register_pruner("not-a-pruner")


def test_trial_seed_by_hand():
    # derived: (base + number * SEED_STRIDE) mod 2**31, SEED_STRIDE = 1_000_003
    assert SEED_STRIDE == 1_000_003
    assert trial_seed(0, 0) == 0 and trial_seed(5, 3) == 5 + 3 * 1_000_003
    assert trial_seed(2 ** 31 - 1, 1) == (2 ** 31 - 1 + 1_000_003) - 2 ** 31
    assert len({trial_seed(1, n) for n in range(100)}) == 100


def test_a_stored_trial_reruns_to_the_identical_curve(write_study):
    # The README's promise: a trial's stored config and seed re-run it exactly.
    path = write_study({"search": {"budget": {"trials": 2}}}, name="rerun")
    study = load_study(path)
    run_study(study, live=False, echo=lambda *_: None)
    trial = open_store(study).get_trials()[1]
    assert outcome_of(trial) == "completed"
    seed = trial.user_attrs["seed"]
    assert seed == trial_seed(study.fixed()["training"]["seed"], 1)
    _, result, _ = train_config(study, trial.user_attrs["config"], seed=seed)
    stored = [trial.intermediate_values[e] for e in sorted(trial.intermediate_values)]
    assert result.curve == stored  # equality, not a tolerance
