"""Replay of Optuna pruners over known curves: bookkeeping, Hyperband rungs, crossing curves."""
from __future__ import annotations

import numpy as np
import optuna
import pytest

from searcher.testing._replay import (compare_pruners, crossing_curves, format_replay_table,
                                     good_mask, measure_call_cost, replay, replay_pruners)


def test_no_pruning_spends_every_epoch():
    curves, slow = crossing_curves(3, 4, epochs=12, seed=1)
    r = replay(curves, optuna.pruners.NopPruner(), good=slow, seed=3)
    assert r.epochs == r.epochs_full == sum(len(c) for c in curves)
    assert r.epoch_ratio == 1.0 and r.best_ratio == 1.0 and r.pruned == 0
    assert r.best == pytest.approx(min(c.min() for c in curves))
    assert r.wrongly_pruned_rate == 0.0 and r.pruned_at == (None,) * 7
    assert "study" not in r.to_dict()


def test_crossing_curves_cross_and_default_good_group():
    curves, slow = crossing_curves(seed=0)
    early = np.array([c[2] for c in curves])
    final = np.array([c.min() for c in curves])
    # By construction: slow starters are worse early (epoch 3, in the median) and every one
    # is better at the end (the curves cross).
    assert np.median(early[slow]) > 10 * np.median(early[~slow])
    assert final[slow].max() < final[~slow].min()
    assert np.array_equal(good_mask(curves, decades=0.5), final <= final.min() * 10 ** 0.5)


def test_outlook_cuts_fewer_good_curves_than_median():
    curves, slow = crossing_curves(seed=0)
    results = compare_pruners(curves, replay_pruners(30, min_epochs=5, warmup=4),
                              good=slow, seed=0)
    by = {r.pruner: r for r in results}
    assert set(by) == {"none", "median", "hyperband", "outlook"}
    assert by["outlook"].wrongly_pruned_rate <= by["median"].wrongly_pruned_rate
    assert by["outlook"].epoch_ratio < 1.0
    assert by["outlook"].summary() == {
        "epochs_ratio": by["outlook"].epoch_ratio, "best_ratio": by["outlook"].best_ratio,
        "wrongly_pruned_rate": by["outlook"].wrongly_pruned_rate,
        "pruned": by["outlook"].pruned, "good_size": by["outlook"].good}


def test_replay_table_rows_from_known_figures():
    # Hand computation: 2 of 4 good curves cut (rate 0.5) prints "2/4"; ratios to 3 places.
    rows = {"median": {"epochs_ratio": 0.5, "best_ratio": 1.25, "wrongly_pruned_rate": 0.5,
                       "pruned": 3, "good_size": 4},
            "none": {"epochs_ratio": 1.0, "best_ratio": 1.0, "wrongly_pruned_rate": 0.0,
                     "pruned": 0, "good_size": 4}}
    header, median, none = format_replay_table(rows).splitlines()
    assert header.split()[0] == "pruner"
    assert median.split() == ["median", "0.500", "1.250", "3", "2/4"]
    assert none.split() == ["none", "1.000", "1.000", "0", "0/4"]


def test_hyperband_prunes_only_at_its_rungs():
    curves, slow = crossing_curves(3, 9, epochs=81, seed=2)
    pruner = optuna.pruners.HyperbandPruner(min_resource=1, max_resource=81, reduction_factor=3)
    r = replay(curves, pruner, good=slow, seed=0)
    # Li et al., JMLR 2018: s_max = floor(log_3 81) = 4, so 5 brackets; Optuna computes
    # floor(log_eta(max/min)) + 1 (its _hyperband.py).
    assert pruner._n_brackets == 5
    order = np.random.default_rng(0).permutation(len(curves))
    assert r.pruned > 0
    for trial, i in zip(r.study.trials, order):
        bracket = pruner._get_bracket_id(r.study, trial)
        # Bracket b is successive halving with min_early_stopping_rate b: rungs complete at
        # min_resource * eta^(b + rung) epochs (Optuna _successive_halving.py; Li et al. r_i).
        rungs = {3 ** (bracket + k) for k in range(5) if 3 ** (bracket + k) < 81}
        assert r.pruned_at[i] is None or r.pruned_at[i] in rungs
        assert (trial.state == optuna.trial.TrialState.PRUNED) == (r.pruned_at[i] is not None)


def test_replay_is_deterministic_and_checks_shapes():
    curves, slow = crossing_curves(3, 5, epochs=20, seed=4)
    make = replay_pruners(20, min_epochs=5, warmup=4)["outlook"]
    a = replay(curves, make(), good=slow, seed=1)
    b = replay(curves, make(), good=slow, seed=1)
    assert a.to_dict() == b.to_dict()
    with pytest.raises(ValueError, match="1-D"):
        replay([np.ones(5), np.ones((2, 3))], optuna.pruners.NopPruner())
    with pytest.raises(ValueError, match="good"):
        replay(curves, optuna.pruners.NopPruner(), good=np.ones(3, bool))


def test_measure_call_cost_reports_its_settings():
    # Timings are machine-dependent (no wall-clock thresholds): only the echoed settings and
    # the record's keys are checked.
    cost = measure_call_cost(points=30, calls=3)
    assert set(cost) == {"points", "calls", "median_ms", "max_ms", "p_fit"}
    assert cost["points"] == 30 and cost["calls"] == 3
    # The judged fast staller sits far above the slow starters' 3rd best, so the timed calls
    # run the whole fit and it gives a small probability (an early exit would mean 1.0).
    assert 0.0 <= cost["p_fit"] < 0.05


def test_short_curve_is_a_diverged_run_not_a_pruned_one():
    curves, slow = crossing_curves(2, 3, epochs=10, seed=5)
    curves[2] = np.array([5.0, 9e3])           # diverged at epoch 2, as fit stops it
    r = replay(curves, optuna.pruners.NopPruner(), good=slow, seed=0)
    assert r.epochs == r.epochs_full == 4 * 10 + 2 and r.pruned == 0
    states = [t.state for t in r.study.trials]
    assert states.count(optuna.trial.TrialState.PRUNED) == 1     # told as the worker does
    assert r.best_ratio == 1.0


class _LastEpochPruner(optuna.pruners.BasePruner):
    """Prunes only at the 12th epoch, as Optuna's rung pruners may at their top rung."""

    def prune(self, study, trial) -> bool:
        return trial.last_step == 12


def test_the_last_epoch_is_never_judged():
    # A run that reached the full budget is finished: like the search worker, the replay
    # does not ask the pruner then, so every curve completes and counts.
    curves, slow = crossing_curves(2, 3, epochs=12, seed=2)
    r = replay(curves, _LastEpochPruner(), good=slow, seed=0)
    assert r.pruned == 0 and r.epoch_ratio == 1.0 and r.best_ratio == 1.0
