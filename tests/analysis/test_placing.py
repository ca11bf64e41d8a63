"""Forecasts of cut curves from finished look-alikes, and labels on comparable evidence."""
from __future__ import annotations

import numpy as np
import pytest

from searcher.analysis import GOOD_LABEL, LOWEST_LABEL, find_groups
from searcher.analysis._analyze import (BLOWN_LABEL, CUT_ABOVE_LABEL, UNDECIDED_LABEL,
                                        place_curves)
from searcher.analysis._placing import forecast_best
from searcher.analysis._records import TrialRecord

T = np.arange(1, 19)
DEEP = 0.5 * T ** -2.5 + 1e-4          # ends near 10^-3.9
STALL = 0.3 + 0.4 * np.exp(-T)         # ends near 10^-0.52


def test_forecast_adds_the_lookalikes_fall():
    # A cut deep curve whose look-alikes fell by Δ decades after the cut is forecast at its
    # own best so far plus Δ (derived: identical curves fall identically).
    refs = [DEEP * f for f in (0.9, 1.0, 1.1)] + [STALL] * 4
    fc = forecast_best(DEEP[:6], refs)
    fall = np.log10(DEEP.min()) - np.log10(DEEP[:6].min())   # same for every scaled copy
    assert fc.level == pytest.approx(np.log10(DEEP[:6].min()) + fall, abs=1e-9)
    assert fc.low < fc.level <= fc.high <= np.log10(DEEP[:6].min())
    assert fc.lookalikes == 3


def test_forecast_refuses_without_comparable_curves():
    # Nothing within half a decade, or fewer than three long enough: cannot be placed.
    assert forecast_best(DEEP[:6], [STALL] * 6) is None
    assert forecast_best(DEEP[:6], [DEEP, DEEP]) is None
    assert forecast_best(DEEP[:6], [DEEP[:6]] * 5) is None    # none ran past the cut


def _rec(number, curve, outcome):
    return TrialRecord(number=number, outcome=outcome, curve=np.asarray(curve, float),
                       best_value=float(np.min(curve)), params={})


def test_cut_curves_join_only_on_a_decided_forecast():
    rng = np.random.default_rng(0)
    finished = [_rec(i, DEEP * rng.uniform(0.8, 1.2), "completed") for i in range(3)]
    finished += [_rec(10 + i, STALL * rng.uniform(0.8, 1.2), "completed") for i in range(9)]
    cut = [_rec(30, DEEP[:6], "pruned"), _rec(31, STALL[:6], "pruned"),
           _rec(32, np.full(6, 0.06), "pruned"),         # over 0.5 decade from every curve
           _rec(33, np.array([0.5, 0.3, 50.0]), "diverged")]
    labels, levels, forecasts, found = place_curves(finished + cut)
    by_trial = dict(zip([r.number for r in finished + cut], labels))
    assert found.good == GOOD_LABEL
    assert by_trial[30] == GOOD_LABEL and 30 in forecasts
    assert by_trial[31] == CUT_ABOVE_LABEL
    assert by_trial[32] == UNDECIDED_LABEL and np.isnan(levels[-2])
    assert by_trial[33] == BLOWN_LABEL


def test_lowest_group_is_never_called_a_stall():
    # Two flat groups 0.3 decade apart (below the 0.5-decade rule): no good group, and the
    # lower one is named for its level, not for its flat shape.
    curves = [np.full(18, 0.1) * f for f in np.linspace(0.95, 1.05, 6)]
    curves += [np.full(18, 0.2) * f for f in np.linspace(0.95, 1.05, 6)]
    found = find_groups(curves)
    assert found.good is None
    assert found.labels[0] == LOWEST_LABEL and "stall" not in found.labels[0]
