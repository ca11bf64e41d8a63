"""Curve features and grouping of validation curves into behaviours in plain words.

Every curve is read on a log10 scale (losses span decades).  Seven features describe it;
level features are measured in decades and scaled with a floor of a fifth of a decade, so a
handful of curves sitting two decades below the rest stay a group of their own instead of
being averaged away.  A rare group far below the rest is first split off on best level
alone; the other curves are grouped by a Ward tree cut where the silhouette is highest
(groups whose centres sit closer than the noise floors count as one).  Truncated (pruned)
curves are described by what they showed before the cut.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import pdist
from sklearn.metrics import silhouette_score

__all__ = ["FEATURES", "GOOD_LABEL", "LOWEST_LABEL", "GOOD_GAP_DECADES", "MIN_DRAWN", "CurveGroups",
           "curve_features", "log_curve", "group_curves", "find_groups"]

FEATURES = ("final_level", "best_level", "late_slope", "mean_level", "plateaus",
            "oscillation", "steepest_at")
GOOD_LABEL = "converges deep"
LOWEST_LABEL = "lowest, not set apart"
# The good group must sit this far (decades of median best level) below the next group.
GOOD_GAP_DECADES = 0.5
# ... and be a minority: the few that stand out, not the bulk of the study.
GOOD_MAX_SHARE = 0.5
# The share is read over the curves drawn at random from the space when there are at least
# this many: a model-based sampler spends most of its trials where it found good ones, so
# the share over all trials says more about the sampler than about the space.
MIN_DRAWN = 5
GOOD_RULE = ("the group whose median best level is lowest, at least "
             f"{GOOD_GAP_DECADES} decade below the next group's, and holding at most "
             f"{GOOD_MAX_SHARE:.0%} of the curves drawn at random from the space (of all "
             f"curves when fewer than {MIN_DRAWN} were)")
# Smallest meaningful spread per feature; below it differences are treated as noise.
_FLOORS = np.array([0.2, 0.2, 0.3, 0.2, 1.0, 0.03, 0.25])
# Levels decide "good", so they weigh more than shape.
_WEIGHTS = np.array([1.0, 1.5, 0.7, 1.0, 0.4, 0.8, 0.4])
_BLOWUP_DECADES = 1.0
_PLATEAU_STEP = 0.01      # decades per epoch below which the curve is flat
_MAX_GROUPS = 7
_WARD_SAMPLE = 1500       # Ward needs O(n^2) memory: cut a sample's tree above this size
_MIN_SEPARATION = 1.5     # scaled units between group centres


def log_curve(curve) -> np.ndarray:
    """log10 curve, saturated one decade above its start: how far a run blew up past that
    tells nothing more about its behaviour, and a non-finite loss counts as blown up."""
    y = np.asarray(curve, dtype=float)
    finite = np.isfinite(y) & (y > 0)
    if not finite.any():
        return np.zeros(max(y.size, 1))
    logs = np.full(y.shape, np.inf)
    logs[finite] = np.log10(y[finite])
    start = logs[np.flatnonzero(finite)[0]]
    return np.minimum(logs, start + _BLOWUP_DECADES)


def curve_features(curve) -> np.ndarray:
    """Seven features of one validation curve (losses, any length >= 1).

    Returns ``[final_level, best_level, late_slope, mean_level, plateaus, oscillation,
    steepest_at]``: levels in log10 loss; ``late_slope`` in decades per decade of epoch over
    the second half; ``mean_level`` is the area under the log curve per epoch; ``plateaus``
    counts flat stretches of >= 3 epochs; ``oscillation`` is the variation beyond the net
    change, per epoch; ``steepest_at`` is the epoch of the steepest fall as a fraction.

    Example:
        >>> curve_features([1.0, 0.1, 0.01])[:2]
        array([-2., -2.])
    """
    y = log_curve(curve)
    n = y.size
    if n == 1:
        return np.array([y[0], y[0], 0.0, y[0], 0.0, 0.0, 0.0])
    step = np.diff(y)
    half = y[n // 2:] if n - n // 2 >= 2 else y[-2:]
    epochs = np.log10(np.arange(n - half.size + 1, n + 1))
    slope = np.polyfit(epochs, half, 1)[0]
    flat = np.abs(step) < _PLATEAU_STEP
    edges = np.diff(np.concatenate([[0], flat.astype(int), [0]]))
    runs = np.flatnonzero(edges == -1) - np.flatnonzero(edges == 1)
    oscillation = (np.abs(step).sum() - abs(y[-1] - y[0])) / (n - 1)
    return np.array([y[-1], y.min(), slope, y.mean(), float((runs >= 2).sum()), oscillation,
                     (np.argmin(step) + 1) / n])


def _scale(features: np.ndarray) -> np.ndarray:
    med = np.median(features, axis=0)
    q75, q25 = np.percentile(features, [75, 25], axis=0)
    spread = np.maximum((q75 - q25) / 1.349, _FLOORS)   # IQR of a normal = 1.349 sigma
    return (features - med) / spread * _WEIGHTS


def _deep_split(best: np.ndarray) -> np.ndarray:
    """Rows below the highest gap of >= GOOD_GAP_DECADES in sorted best levels that leaves
    at least 2 and at most half of the curves underneath (empty when there is none).

    Ward merges small groups cheaply (its cost grows with group size), so a rare group that
    sits decades lower is split off on level alone before the shapes are grouped."""
    order = np.argsort(best, kind="stable")
    gaps = np.diff(best[order])
    cuts = [i for i in range(1, best.size // 2) if gaps[i] >= GOOD_GAP_DECADES]
    return order[:cuts[-1] + 1] if cuts else np.array([], dtype=int)


def _ward_groups(x: np.ndarray) -> np.ndarray:
    """Ward tree cut at the group count (1..7) with the best silhouette; 0-based ids."""
    n = x.shape[0]
    if n < 4:
        return np.zeros(n, dtype=int)
    rng = np.random.default_rng(0)
    rows = np.sort(rng.choice(n, _WARD_SAMPLE, replace=False)) if n > _WARD_SAMPLE \
        else np.arange(n)
    tree = linkage(x[rows], method="ward")
    best, best_score = np.zeros(rows.size, dtype=int), 0.25   # below this: one group
    for k in range(2, min(_MAX_GROUPS, rows.size - 1) + 1):
        cut = fcluster(tree, k, criterion="maxclust") - 1
        if cut.max() < 1:
            continue
        centres = np.array([x[rows][cut == g].mean(axis=0) for g in range(cut.max() + 1)])
        if pdist(centres).min() < _MIN_SEPARATION:
            continue    # groups closer than the noise floors are one behaviour
        score = silhouette_score(x[rows], cut)
        if score > best_score:
            best, best_score = cut, score
    if rows.size == n:
        return best
    centres = np.array([x[rows][best == g].mean(axis=0) for g in range(best.max() + 1)])
    return np.argmin(((x[:, None, :] - centres[None]) ** 2).sum(axis=2), axis=1)


def _group_ids(feats: np.ndarray) -> np.ndarray:
    ids = np.zeros(feats.shape[0], dtype=int)
    deep = _deep_split(feats[:, 1])
    rest = np.setdiff1d(np.arange(feats.shape[0]), deep)
    ids[rest] = _ward_groups(_scale(feats[rest])) + (1 if deep.size else 0)
    return ids


def _shape_label(med: np.ndarray) -> str:
    final, best, slope, _, plateaus, osc, steepest = med
    if osc > 0.12:
        return "erratic"
    if final - best > 0.5:
        return "blows up"
    if slope < -0.3:
        return "steady descent"
    if steepest <= 0.35 and plateaus >= 1:
        return "stalls early"
    return "levels off"


@dataclass
class CurveGroups:
    """Grouping of a set of curves.

    Attributes:
        labels: one label per curve (unique per group).
        features: ``[n_curves, 7]`` raw features (see :data:`FEATURES`).
        good: the good group's label, or None when no group is distinct.
        good_threshold: log10 loss; a curve whose best level is at or below it belongs
            with the good group (midway between the good group's worst and the next
            group's median best level), None without a good group.
        note: plain-words reason when there is no good group.
    """

    labels: list[str]
    features: np.ndarray
    good: str | None
    good_threshold: float | None
    note: str
    rule: str = GOOD_RULE


def find_groups(curves, drawn=None) -> CurveGroups:
    """Group ``curves`` (list of 1-D loss arrays) and name the good group if there is one.

    Args:
        curves: validation losses per epoch, one array per trial.
        drawn: optional boolean per curve, True where the trial's configuration was drawn at
            random from the space (a sampler's start-up trials).  With at least
            :data:`MIN_DRAWN` of them the minority rule is read over those curves only.
    """
    feats = np.array([curve_features(c) for c in curves]).reshape(len(curves), len(FEATURES))
    if len(curves) < 2:
        return CurveGroups(["single curve"] * len(curves), feats, None, None,
                           "too few curves to form groups")
    ids = _group_ids(feats)
    order = sorted(range(ids.max() + 1),
                   key=lambda g: np.median(feats[ids == g, 1]))
    medians = {g: np.median(feats[ids == g], axis=0) for g in order}
    names: dict[int, str] = {}
    good, threshold, note = None, None, ""
    if len(order) >= 2:
        low, nxt = medians[order[0]][1], medians[order[1]][1]
        pick = np.ones(len(curves), dtype=bool)
        if drawn is not None and int(np.sum(drawn)) >= MIN_DRAWN:
            pick = np.asarray(drawn, dtype=bool)
        whose = "of the curves" if pick.all() else "of the curves drawn at random"
        share = float(np.mean(ids[pick] == order[0]))
        if share > GOOD_MAX_SHARE:
            note = (f"no distinct good group: the lowest group holds {share:.0%} {whose} "
                    f"(rule: at most {GOOD_MAX_SHARE:.0%}); it is the bulk of the study, not "
                    f"a few configurations that stand out")
        elif nxt - low >= GOOD_GAP_DECADES:
            names[order[0]] = good = GOOD_LABEL
            worst_in = feats[ids == order[0], 1].max()
            threshold = float((worst_in + nxt) / 2)
        else:
            note = (f"no distinct good group: the lowest group's median best level is only "
                    f"{nxt - low:.2f} decade below the next (rule: at least {GOOD_GAP_DECADES})")
    else:
        note = "no distinct good group: all curves behave as one group"
    used: dict[str, int] = {GOOD_LABEL: 1} if good else {}
    for g in order:
        if g in names:
            continue
        # The lowest group is named for its level, never for a stall: it is the best there is
        # even when it is not set apart.
        base = LOWEST_LABEL if g == order[0] else _shape_label(medians[g])
        used[base] = used.get(base, 0) + 1
        names[g] = base if used[base] == 1 else f"{base} #{used[base]}"
    return CurveGroups([names[g] for g in ids], feats, good, threshold, note)


def group_curves(curves) -> list[str]:
    """One plain-words behaviour label per validation curve.

    Args:
        curves: list of 1-D arrays of validation losses per epoch (lengths may differ;
            truncated curves count by what they showed).

    Example:
        >>> labels = group_curves([np.geomspace(1, 1e-3, 10)] * 3 + [np.full(10, 0.5)] * 9)
        >>> labels[0], labels[-1]
        ('converges deep', 'stalls early')
    """
    return find_groups(curves).labels
