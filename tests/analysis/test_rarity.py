"""Rarity of the good group among the trials and in the space."""
from __future__ import annotations

import numpy as np
import pytest

from searcher.analysis._rarity import MIN_RANDOM, random_drawn, rarity
from searcher.analysis._records import TrialRecord


def _rec(number, lmax, startup=4, kind="tpe"):
    return TrialRecord(number=number, outcome="completed", curve=np.ones(3), best_value=1.0,
                       params={"model.hidden.lmax": lmax},
                       config={"search": {"sampler": {"kind": kind, "startup": startup}}})


def test_random_drawn_from_the_stored_sampler():
    # Optuna's model-based samplers draw their first n_startup_trials at random (Optuna docs,
    # TPESampler n_startup_trials); a random sampler draws every trial at random.
    assert random_drawn(_rec(3, 1)) and not random_drawn(_rec(4, 1))
    assert random_drawn(_rec(40, 1, kind="random"))


def test_exact_intervals_and_both_shares():
    # 10 random start-up trials with no good one: the exact (Clopper–Pearson) upper bound of
    # a 95% interval for 0 of 10 is 1 − 0.025^(1/10) = 0.30850 (derived from the beta
    # quantile).  Later trials are mostly good (a sampler that exploits), so the share of
    # the trials overstates the share of the space.
    recs = [_rec(i, 1, startup=10) for i in range(10)]
    recs += [_rec(10 + i, 2, startup=10) for i in range(10)]
    good = np.array([False] * 10 + [True] * 8 + [False] * 2)
    draws = [{"model.hidden.lmax": 1 if i % 4 else 2} for i in range(400)]   # 1 in 4 has lmax 2
    out = rarity(recs, good, undecided=2, draws=draws)
    assert out["of_trials"]["share"] == pytest.approx(0.4)
    rand = out["of_space"]["random_trials"]
    assert (rand["good"], rand["of"]) == (0, 10)
    assert rand["interval"][0] == 0.0
    assert rand["interval"][1] == pytest.approx(1 - 0.025 ** 0.1, abs=1e-6)
    # The tree learns P(good | lmax=2) = 0.8, P(good | lmax=1) = 0: a random draw hits lmax 2
    # one time in four, so the model share is 0.8/4 = 0.2 (derived).
    assert out["of_space"]["model"]["share"] == pytest.approx(0.2)
    assert out["undecided"] == 2


def test_too_few_random_trials_is_said():
    recs = [_rec(i, 1, startup=MIN_RANDOM - 1) for i in range(12)]
    out = rarity(recs, np.arange(12) < 3, undecided=0, draws=None)
    assert out["of_space"]["random_trials"] is None
    assert "too thin" in out["of_space"]["note"] and out["of_space"]["model"] is None
