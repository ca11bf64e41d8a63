"""OutlookPruner and prob_beats: extrapolation of exact published shapes, pruning rules."""
from __future__ import annotations

import math

import numpy as np
import optuna
import pytest

from searcher.search.pruners._outlook import (_TRUST_FRACTION, OutlookPruner, _fit_shape,
                                        crossing_prior, prob_beats)
from searcher.search.pruners._shapes import SHAPES

# Curve families of Domhan, Springenberg & Hutter, IJCAI 2015 (Table 1), written for a falling
# log10 loss: pow3 y = c + a x^-alpha, exp3 y = c + a exp(-b x).
X = 100
x = np.arange(1.0, 13.0)
POW3 = -4.0 + 3.0 * x ** -0.5           # c=-4, a=3, alpha=0.5
POW3_END = -4.0 + 3.0 * X ** -0.5       # = -3.7 (derived from the formula)
EXP3 = -4.0 + 3.0 * np.exp(-0.1 * x)    # c=-4, a=3, b=0.1 per epoch
EXP3_END = -4.0 + 3.0 * math.exp(-0.1 * X)


def _mean_at_end(name: str, y: np.ndarray) -> float:
    shape = next(s for s in SHAPES if s.name == name)
    end = np.array([float(X)])
    mean, _, _, _ = _fit_shape(shape, x, x / X, y, end, end / X, y.min() - 6.0, y.max() + 1.0,
                               0.01)
    return float(mean)


@pytest.mark.parametrize("name,y,end", [("pow3", POW3, POW3_END), ("exp3", EXP3, EXP3_END)])
def test_fit_recovers_exact_curve(name, y, end):
    # Domhan et al. 2015 shapes: the generating curve is inside the family, so the fit must
    # land on it and extrapolate to the analytic value at X (tolerance: 0.01 decade).
    assert _mean_at_end(name, y) == pytest.approx(end, abs=0.01)


@pytest.mark.parametrize("y,end", [(POW3, POW3_END), (EXP3, EXP3_END)])
def test_prob_beats_far_below_and_far_above(y, end):
    curve = 10.0 ** y
    assert curve.min() > 10.0 ** (end + 0.3)           # the target is not beaten yet
    # Ends 0.3 decades below a target not yet beaten -> near certain; a target 2 decades
    # below the analytic end -> hopeless (Domhan et al. 2015 stop rule P < 0.05).  "Far" is 2
    # decades because Weibull (exp3 at delta = 1) keeps the asymptote uncertain after 12 of
    # 100 epochs.
    assert prob_beats(curve, X, 10.0 ** (end + 0.3)) > 0.99
    assert prob_beats(curve, X, 10.0 ** (end - 2.0)) < 0.01


def test_prob_beats_edge_cases():
    curve = 10.0 ** POW3
    assert prob_beats(curve, X, curve.min() * 2) == 1.0          # already beaten
    assert math.isnan(prob_beats(curve[:4], X, 1e-9))             # too few points
    assert prob_beats(curve, len(curve), 1e-9) == 0.0             # budget used up
    noisy = curve.copy()
    noisy[[2, 5]] = [np.nan, np.inf]
    noisy[7] = -1.0                                               # not a loss: ignored
    assert prob_beats(noisy, X, 10.0 ** (POW3_END - 0.8)) < 0.01
    assert math.isnan(prob_beats(np.full(8, np.nan), X, 1e-3))


def _study(pruner, finished=(1e-4, 2e-4, 3e-4)):
    study = optuna.create_study(storage=optuna.storages.InMemoryStorage(), pruner=pruner,
                                direction="minimize", study_name="curve-fit-test")
    for v in finished:
        t = study.ask()
        for epoch in range(1, 31):
            t.report(v * (31 - epoch), epoch)
        study.tell(t, v)
    return study


def _first_prune(study, values):
    trial = study.ask()
    for epoch, v in enumerate(values, start=1):
        trial.report(float(v), epoch)
        if trial.should_prune():
            return epoch
    return None


def test_pruner_prunes_a_stalled_curve_at_min_epochs_but_spares_a_flat_start():
    study = _study(OutlookPruner(min_epochs=8, max_epochs=30))
    # Fell two decades, then stalled far above the target: the fit is trusted at min_epochs.
    stalled = np.r_[1.0, 0.1, np.full(28, 0.01)] * (1 + 0.01 * np.sin(np.arange(30)))
    assert _first_prune(study, stalled) == 8
    # Flat since epoch 1 and unlike every finished curve: it may still be on a plateau, so
    # it keeps its chance until _TRUST_FRACTION of the 30-epoch budget (epoch 15).
    flat = 0.1 * (1 + 0.01 * np.sin(np.arange(30)))
    assert _first_prune(study, flat) == math.ceil(_TRUST_FRACTION * 30)


def test_crossing_prior_counts_look_alike_finished_curves():
    x = np.arange(30)
    plateau = np.r_[np.full(8, 0.03), 0.03 * 10.0 ** (-0.3 * np.arange(1, 23))]
    fast = 10.0 ** (-3.0 * (1 - np.exp(-x / 1.5)))
    finished, finals = [plateau, plateau * 1.1, fast], [1e-5, 1.1e-5, 1e-3]
    # Hand count: the running flat curve matches both plateau curves (RMS 0 and 0.04
    # decade), not the fast one, and both ended below the target.
    assert crossing_prior(np.full(6, 0.03), finished, finals, target=1e-4) == (2, 2)
    assert crossing_prior(fast[:6] * 1.05, finished, finals, target=1e-4) == (0, 1)
    nan_curve = np.r_[np.nan, np.full(5, 0.03)]
    assert crossing_prior(nan_curve, finished, finals, target=1e-4) == (2, 2)
    assert crossing_prior(np.full(6, 0.03), [], [], target=1e-4) == (0, 0)


def test_prior_spares_a_plateau_curve_that_finished_ones_show_will_drop():
    x = np.arange(1, 31)
    plateau = np.where(x <= 20, 0.03, 0.03 * 10.0 ** (-0.3 * (x - 20)))
    study = _study(OutlookPruner(min_epochs=5, max_epochs=30, rank=3),
                   finished=(1e-4, 2e-4, 3e-4))
    for _ in range(2):                 # two finished look-alikes that dropped past 3e-4
        t = study.ask()
        for epoch, v in enumerate(plateau, start=1):
            t.report(float(v), epoch)
        study.tell(t, float(plateau.min()))
    # Past _TRUST_FRACTION (epoch 15) the fit alone would cut a flat curve; the prior,
    # which saw curves like it sit flat to epoch 20 and then drop, keeps it.
    assert _first_prune(study, np.full(18, 0.03)) is None
    assert _first_prune(study, np.r_[1.0, np.full(17, 0.03)]) is not None   # unlike them


def test_pruner_never_prunes_a_curve_beating_kth_best():
    study = _study(OutlookPruner(min_epochs=5, max_epochs=30, rank=3))
    # 3rd best finished value is 3e-4; this curve reaches 2.5e-4 at epoch 3 and stalls.
    values = np.r_[1e-2, 1e-3, 2.5e-4, np.full(26, 5e-3)]
    assert _first_prune(study, values) is None


def test_pruner_needs_rank_finished_trials():
    study = _study(OutlookPruner(min_epochs=5, max_epochs=30, rank=3), finished=(1e-4, 2e-4))
    assert _first_prune(study, np.full(29, 0.1)) is None


def test_pruner_never_prunes_at_max_epochs():
    pruner = OutlookPruner(min_epochs=5, max_epochs=30)
    study = _study(pruner)
    trial = study.ask()
    for epoch in range(1, 31):
        trial.report(0.1, epoch)
    frozen = study.trials[-1]
    assert frozen.last_step == 30 and pruner.prune(study, frozen) is False


def test_pruner_handles_nan():
    study = _study(OutlookPruner(min_epochs=5, max_epochs=30))
    values = np.r_[1.0, np.full(29, 0.01)]
    values[[1, 4, 6]] = np.nan
    values[5] = np.inf
    # Epochs 2, 5, 6, 7 are not finite, so the 5th finite point (the fewest fitted) arrives
    # at epoch 9, past min_epochs; the stalled curve is pruned then.
    assert _first_prune(study, values) == 9
    study2 = _study(OutlookPruner(min_epochs=5, max_epochs=30))
    assert _first_prune(study2, np.full(29, np.nan)) is None


def test_pruner_validation_and_direction():
    with pytest.raises(ValueError, match="min_epochs"):
        OutlookPruner(min_epochs=10, max_epochs=10)
    with pytest.raises(ValueError, match="margin"):
        OutlookPruner(margin=1.5)
    with pytest.raises(ValueError, match="rank"):
        OutlookPruner(rank=0)
    with pytest.raises(ValueError, match="headroom"):
        OutlookPruner(headroom=-0.1)
    study = optuna.create_study(pruner=OutlookPruner(), direction="maximize")
    trial = study.ask()
    trial.report(1.0, 1)
    with pytest.raises(ValueError, match="minimising"):
        trial.should_prune()


def test_margin_spares_a_curve_ending_near_the_kth_best():
    # Stalled at 5e-4: above the 3rd best finished value (3e-4), so the plain rule prunes it
    # at min_epochs, but within half a decade of it (3e-4 x 10^0.5 = 9.5e-4, derived), so
    # headroom 0.5 keeps it; a stall at 1e-2 is pruned under both.
    near = np.r_[1.0, 1e-2, np.full(28, 5e-4)] * (1 + 0.01 * np.sin(np.arange(30)))
    far = np.r_[1.0, 0.1, np.full(28, 1e-2)] * (1 + 0.01 * np.sin(np.arange(30)))
    plain = OutlookPruner(min_epochs=8, max_epochs=30, headroom=0.0)
    assert _first_prune(_study(plain), near) == 8
    spare = OutlookPruner(min_epochs=8, max_epochs=30, headroom=0.5)
    assert _first_prune(_study(spare), near) is None
    assert _first_prune(_study(spare), far) == 8


def _flat_study(look_alikes: int):
    study = _study(OutlookPruner(min_epochs=2, max_epochs=30))
    for _ in range(look_alikes):  # finished curves flat at 0.1: all missed the target
        t = study.ask()
        for epoch in range(1, 31):
            t.report(0.1 * (1 + 0.01 * math.sin(epoch)), epoch)
        study.tell(t, 0.1)
    return study


def test_look_alikes_alone_prune_before_a_fit_is_possible():
    # With fewer than 5 points no shape can be fitted. Laplace's rule of succession on the
    # look-alikes (textbook probability, e.g. Jaynes 2003, ch. 18; memory),
    # (hits + 1) / (seen + 2) < 0.05, needs 19 that all missed: 1/21 = 0.048 prunes at
    # min_epochs, 18 (1/20 = 0.05) do not, so the fit decides from epoch 5.
    flat = 0.1 * (1 + 0.01 * np.cos(np.arange(30)))
    assert _first_prune(_flat_study(19), flat) == 2
    assert _first_prune(_flat_study(18), flat) >= 5
