"""The ``outlook`` pruner: learning-curve extrapolation (after Domhan, Springenberg & Hutter,
IJCAI 2015).

Rung-based pruners (median, successive halving, Hyperband) compare a trial with its rivals at
the *same* epoch, so they assume learning curves rarely cross.  Equivariant networks often sit
on a plateau and then drop by decades, and rung rules kill them.  This pruner instead fits a
few published parametric curve shapes to the trial's own log10 validation loss, extrapolates
them to the last epoch, and prunes only when the predicted chance of beating the k-th best
finished trial is small.

Every shape is ``y(x) = c + a * phi(x; theta)`` with ``y = log10(loss)``, ``a >= 0`` (the loss
never rises in expectation) and ``c`` the asymptote.  The shapes are Domhan et al.'s families,
turned upside down because they model accuracy rising where we model loss falling:

* pow3      ``phi = x^(-alpha)``                    (their pow3: c - a x^-alpha)
* exp3      ``phi = exp(-b u)``, ``u = x / X``      (their exp3: c - exp(-a x + b))
* mmf       ``phi = 1 / (1 + (u / h)^delta)``       (their MMF; their log power is the same shape
  once an offset is allowed, so it is not fitted twice)
* weibull   ``phi = exp(-(u / h)^delta)``           (their Weibull; Janoschek is the same shape
  with kappa' = kappa^delta, so it is not fitted twice)

Weibull and mmf are sigmoidal in log x, so they can describe a plateau followed by a drop.

Instead of Domhan's MCMC we use a Laplace approximation, which is fast and deterministic: each
shape is fitted by variable projection (a grid over theta with c and a solved in closed form)
followed by a bounded, robust (soft-L1) ``scipy.optimize.least_squares`` refinement from the
best grid point; the prediction at X is Student-t (degrees of freedom n - k) with the
residual variance plus the parameter variance propagated through the Jacobian covariance;
shapes are mixed with BIC weights.

A curve fit alone cannot see the drop that ends a plateau, so the decision adds three rules
around it (all deterministic):

1. *Mid-drop*: while the best so far falls faster than ``max(0.1, 3 noise scales)`` decades
   per epoch (over the last two epochs), no fit can place the asymptote: never prune.
2. *Empirical crossing prior*: the finished (COMPLETE) trials whose log curves lie within
   0.25 decade RMS of the running one over the epochs seen (:func:`crossing_prior`) are its
   look-alikes; ``hits`` of those ``m`` ended at or below the target.  The fit counts as one
   pseudo-observation beside them (a beta-binomial blend): prune when
   ``(hits + P_fit) / (m + 1) < margin``.  Many look-alikes that all failed make pruning
   decisive; one look-alike that later dropped past the target is enough to spare a curve.
   Before a fit is possible (fewer than 5 points) the look-alikes speak alone, through
   Laplace's rule of succession: prune when ``(hits + 1) / (m + 2) < margin``.
3. *Plateau guard*: with no look-alike, a curve whose best is still within noise of its first
   value (it has not started to learn) is not judged by the fit before half the budget.

Related work: LC-PFN (Adriaensen et al., NeurIPS 2023) replaces the parametric mixture by a
prior-fitted network trained on curves sampled from the same families; we keep the
parametric fit because it needs no trained network and no GPU.

``headroom`` (decades, default 0.5) moves the target up from the k-th best value to
``kth * 10**headroom``: a curve that may still finish within that distance of the k-th best is
spared.  With 0 the pruner serves "find the top k"; with 0.5 (the separation the analysis
layer demands between its groups) it serves "keep every curve that may land in the best
group", which the analysis needs to say what the good configurations share, at the price of
more epochs.  On the replay benchmark 0 cut 9 of 19 good-group curves of the demo and 1 of
6 slow starters; 0.5 cut none (docs/benchmarks.md).

Known limit: before any look-alike has finished, a curve that has left its plateau and
slowed down is judged by the fit alone, and the ground-truth good group is judged against
the k-th best (``rank``), not against "better than the rest".
"""
from __future__ import annotations

import math

import numpy as np
import optuna
from scipy.optimize import least_squares
from scipy.special import stdtr

from searcher.search.pruners._base import BaseCurvePruner, curve_of
from searcher.search.pruners._shapes import SHAPES, Shape

__all__ = ["OutlookPruner", "prob_beats", "crossing_prior"]

# Residual standard deviation floor in decades: a validation loss measured on a finite set
# always jitters by a few percent, and exact synthetic curves must not give zero variance.
_NOISE_FLOOR = 0.01
# Prior on the asymptote: at most this many decades below the best value seen so far
# (float32 training rarely gains more than ~7 decades in total).
_MAX_DROP = 6.0
# Fewest finite points to fit; each shape also needs two more points than parameters.
_MIN_POINTS = 5
# Finished curves within this RMS distance (decades) of a running one count as its
# neighbours in the crossing prior: about the spread of one configuration over seeds.
_NEIGHBOUR_DECADES = 0.25
# A curve is "still flat" while its best is within max(this, 3 noise scales) of its start.
_FLAT_DECADES = 0.1
# Falling faster than this (decades per epoch, best so far) = in the middle of a drop.
_FALL_DECADES = 0.1
# Until this fraction of the budget, a still-flat curve with no neighbours is not pruned.
_TRUST_FRACTION = 0.5
_STARTS = 1          # refinements per shape: the grid already is the multi-start
_MAX_NFEV = 30       # small: the grid start is already close


def _project(y: np.ndarray, phis: np.ndarray, c_lo: float) -> tuple[np.ndarray, np.ndarray,
                                                                      np.ndarray]:
    """Closed-form c, a (a >= 0, c >= c_lo) for every grid row of ``phis`` [G, n]."""
    pm = phis.mean(axis=1, keepdims=True)
    dev = phis - pm
    var = (dev * dev).sum(axis=1)
    a = np.where(var > 1e-12, (dev * (y - y.mean())).sum(axis=1) / np.maximum(var, 1e-12), 0.0)
    a = np.maximum(a, 0.0)
    c = np.maximum(y.mean() - a * pm[:, 0], c_lo)
    rss = ((c[:, None] + a[:, None] * phis - y) ** 2).sum(axis=1)
    return c, a, rss


def _fit_shape(shape: Shape, x, u, y, x_end, u_end, c_lo, c_hi, scale):
    """Fit one shape; returns (mean, scale at X, degrees of freedom, BIC) or None."""
    n, m = y.size, shape.grid.shape[1]
    k = m + 2
    if n < k + 2:
        return None
    # Broadcast theta [m, G, 1] against x [1, n]: every grid row's phi in one call.
    phis = shape.phi(x[None, :], u[None, :], shape.grid.T[:, :, None])[0]
    c0, a0, rss0 = _project(y, phis, c_lo)
    lower = np.array([c_lo, 0.0, *shape.lower])
    upper = np.array([c_hi, np.inf, *shape.upper])

    def resid(p):
        return p[0] + p[1] * shape.phi(x, u, p[2:])[0] - y

    def jac(p):
        phi, dphi = shape.phi(x, u, p[2:])
        return np.column_stack([np.ones_like(phi), phi, p[1] * dphi])

    best = None
    for g in np.argsort(rss0, kind="stable")[:_STARTS]:
        p0 = np.clip(np.r_[c0[g], a0[g], shape.grid[g]], lower, upper)
        res = least_squares(resid, p0, jac=jac, bounds=(lower, upper), loss="soft_l1",
                            f_scale=scale, max_nfev=_MAX_NFEV, method="trf")
        if best is None or res.cost < best.cost:
            best = res
    p = best.x
    r = resid(p)
    rss = float(r @ r)
    # The residual variance from n - k points is unreliable when few points are seen, so the
    # curve-wide noise estimate ``scale`` is a floor for it.
    s2 = max(rss / (n - k), scale ** 2)
    J = jac(p)
    phi_end, dphi_end = shape.phi(x_end, u_end, p[2:])
    g = np.r_[1.0, phi_end[0], p[1] * dphi_end[0]]
    # Laplace approximation: Cov = s^2 (J^T J)^+; directions the data cannot see are dropped.
    cov = s2 * np.linalg.pinv(J.T @ J, rcond=1e-10, hermitian=True)
    spread = math.sqrt(s2 + max(float(g @ cov @ g), 0.0))
    mean = p[0] + p[1] * phi_end[0]
    bic = n * math.log(max(rss / n, _NOISE_FLOOR ** 2)) + k * math.log(n)
    return mean, spread, n - k, bic


def _noise_scale(y: np.ndarray) -> float:
    """Robust noise scale (decades) of a log curve from its second differences: a smooth
    trend barely moves them (MAD / 0.6745 = 1.4826 MAD; Var(d2) = 6 sigma^2 for white noise)."""
    if y.size < 3:
        return _NOISE_FLOOR
    return max(_NOISE_FLOOR, 1.4826 * float(np.median(np.abs(np.diff(y, 2)))) / math.sqrt(6.0))


def _logs(curve) -> np.ndarray:
    y = np.asarray(curve, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.log10(y)
    out[~np.isfinite(out)] = np.nan
    return out


def _still_flat(finite: np.ndarray) -> bool:
    """True while a curve's best so far is within noise of its first value (no drop yet)."""
    y = np.log10(finite)
    return float(y[0] - y.min()) < max(_FLAT_DECADES, 3.0 * _noise_scale(y))


def _falling_fast(finite: np.ndarray) -> bool:
    """True while the best so far fell by more than max(_FALL_DECADES, 3 noise scales) per
    epoch over the last two epochs: the curve is in a drop whose end no fit can see."""
    if finite.size < 3:
        return False
    best = np.minimum.accumulate(np.log10(finite))
    return float(best[-3] - best[-1]) / 2.0 > max(_FALL_DECADES, 3.0 * _noise_scale(best))


def crossing_prior(curve, finished, finals, target: float,
                   radius: float = _NEIGHBOUR_DECADES) -> tuple[int, int]:
    """Empirical crossing evidence: of the finished curves that looked like ``curve`` up to
    its last epoch, how many ended at or below ``target``?

    "Looked like" means a root-mean-square distance of at most ``radius`` decades between
    the log10 curves over the epochs both have finite (at least ``min(3, len(curve))`` of
    them).  Matching the whole prefix, not only the current level, keeps plateau curves and
    curves that fell fast and stalled apart, though both may sit at the same level now.

    Args:
        curve: the running trial's losses, epoch 1 first.
        finished: finished trials' loss curves (any length; shorter ones are compared over
            what they have).
        finals: their final (best) values, the same order.
        target: the loss to beat.
        radius: neighbourhood radius in decades.

    Returns:
        ``(hits, neighbours)``.

    Example:
        >>> plateau = np.r_[np.full(6, 0.03), np.geomspace(0.03, 1e-4, 14)]
        >>> crossing_prior(np.full(6, 0.03), [plateau, np.geomspace(1, 1e-3, 20)],
        ...                [1e-4, 1e-3], target=2e-4)
        (1, 1)
    """
    y = _logs(curve)
    n = y.size
    need = min(3, n)
    hits = seen = 0
    for other, final in zip(finished, finals):
        z = _logs(other)[:n]
        both = np.isfinite(y[:z.size]) & np.isfinite(z)
        if both.sum() < need:
            continue
        if math.sqrt(float(np.mean((y[:z.size][both] - z[both]) ** 2))) <= radius:
            seen += 1
            hits += int(final <= target)
    return hits, seen


def prob_beats(curve, max_epochs: int, target: float) -> float:
    """Probability that a loss curve ends below ``target`` by epoch ``max_epochs``.

    Args:
        curve: validation loss per epoch, ``curve[i]`` at epoch ``i + 1``; NaN, Inf and values
            <= 0 are ignored (divergence is the trainer's business).
        max_epochs: the epoch whose loss is predicted (the full budget).
        target: the loss to beat (e.g. the k-th best finished trial's value).

    Shapes:
        curve: [n] with n >= 1.

    Returns:
        1.0 when the best finite value already beats ``target``; the best-so-far verdict (1.0
        or 0.0) when ``len(curve) >= max_epochs``; NaN when fewer than 5 finite points remain;
        otherwise the BIC-weighted mixture probability P(log10 loss at max_epochs < log10
        target).

    Example:
        >>> x = np.arange(1, 11)
        >>> round(prob_beats(10 ** (-3 + 2 * x ** -0.5), 100, 1e-2), 3)
        1.0
    """
    y_all = np.asarray(curve, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        logs = np.log10(y_all)
    ok = np.isfinite(logs)
    if not ok.any():
        return float("nan")
    best = float(y_all[ok].min())
    if best <= target:
        return 1.0
    if y_all.size >= max_epochs:
        return 0.0
    if ok.sum() < _MIN_POINTS:
        return float("nan")
    x = np.arange(1, y_all.size + 1, dtype=float)[ok]
    y = logs[ok]
    x_end = np.array([float(max_epochs)])
    u, u_end = x / max_epochs, x_end / max_epochs
    # The noise scale sets where soft-L1 switches from squared to absolute residuals.
    scale = _noise_scale(y)
    c_lo, c_hi = float(y.min()) - _MAX_DROP, float(y.max()) + 1.0
    fits = [f for s in SHAPES
            if (f := _fit_shape(s, x, u, y, x_end, u_end, c_lo, c_hi, scale)) is not None]
    means, spreads, dofs, bics = (np.array(v) for v in zip(*fits))
    w = np.exp(-(bics - bics.min()) / 2.0)
    w /= w.sum()
    # Student-t rather than Gaussian: the variance itself is estimated from n - k points.
    t = (math.log10(target) - means) / spreads
    return float(np.clip(w @ stdtr(dofs, t), 0.0, 1.0))


class OutlookPruner(BaseCurvePruner):
    """Prune a trial when its extrapolated curve is unlikely to beat the k-th best finished one.

    The trial's intermediate values (validation loss, step = epoch from 1) are passed to
    :func:`prob_beats` with ``target`` = the ``rank``-th best value among COMPLETE trials (a
    complete trial without a finite value counts with its best finite intermediate value).

    Never prunes: before ``min_epochs``; at or beyond ``max_epochs``; while fewer than
    ``rank`` trials have completed; a trial whose best value so far already beats the target;
    a trial with fewer than 5 finite values.  Minimising studies only.

    Args:
        min_epochs: first epoch at which a trial may be pruned.
        max_epochs: the full training budget in epochs (the extrapolation point).
        margin: prune when P(final < target) is below this chance (Domhan et al. use 0.05).
        rank: k, the rank of the finished trial the running one must beat.
        headroom: decades above the k-th best value that still count as beating it.

    Example:
        >>> pruner = OutlookPruner(min_epochs=5, max_epochs=30, margin=0.05, rank=3)
    """

    def __init__(self, min_epochs: int = 1, max_epochs: int = 20, margin: float = 0.05,
                 rank: int = 3, headroom: float = 0.5) -> None:
        if not 1 <= min_epochs < max_epochs:
            raise ValueError("1 <= min_epochs < max_epochs must hold, but got "
                             f"min_epochs={min_epochs}, max_epochs={max_epochs}.")
        if not 0.0 < margin < 1.0:
            raise ValueError(f"0 < margin < 1 must hold, but got margin={margin}.")
        if rank < 1:
            raise ValueError(f"rank >= 1 must hold, but got rank={rank}.")
        if not 0.0 <= headroom <= _MAX_DROP:
            raise ValueError(f"0 <= headroom <= {_MAX_DROP:g} must hold, "
                             f"but got headroom={headroom}.")
        self._min_epochs = int(min_epochs)
        self._max_epochs = int(max_epochs)
        self._margin = float(margin)
        self._rank = int(rank)
        self._headroom = float(headroom)

    def prune(self, study: optuna.Study, trial: optuna.trial.FrozenTrial) -> bool:
        self.check_direction(study)
        step = trial.last_step
        if step is None or step < self._min_epochs or step >= self._max_epochs:
            return False
        curves, finals = self.finished(study)
        if len(finals) < self._rank:
            return False
        target = sorted(finals)[self._rank - 1] * 10.0 ** self._headroom
        curve = curve_of(trial, step)
        finite = curve[np.isfinite(curve) & (curve > 0)]
        if finite.size == 0 or finite.min() <= target:
            return False                       # never prune a curve that beats the target
        if _falling_fast(finite):
            return False                       # mid-drop: no fit can place the asymptote yet
        p_fit = prob_beats(curve, self._max_epochs, target)
        hits, seen = crossing_prior(curve, curves, finals, target)
        if math.isnan(p_fit):
            # Too few points to fit: only the look-alikes speak, through Laplace's rule of
            # succession, (hits + 1) / (seen + 2); with the default margin that takes 19
            # finished look-alikes that all missed.
            return seen > 0 and (hits + 1) / (seen + 2) < self._margin
        if seen:
            # Beta-binomial blend: the fit counts as one pseudo-observation beside the
            # finished curves that looked like this one at this epoch.
            return (hits + p_fit) / (seen + 1) < self._margin
        # Nothing finished looked like this curve.  A fit cannot see the drop that ends a
        # plateau, so a curve still flat since its first epoch keeps its chance until
        # _TRUST_FRACTION of the budget is spent.
        if _still_flat(finite) and step < _TRUST_FRACTION * self._max_epochs:
            return False
        return p_fit < self._margin
