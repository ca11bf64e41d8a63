"""``census``: how rare and how deep the good region of a study's space is.

A random sample of configurations (``study.sample(n, seed)``) is trained at the study's
fidelity without pruning, through the same cached ground truth as the pruner benchmark
(:func:`searcher.bench._pruners.truth_curves`), and every configuration's best validation
loss is read on a log10 scale.

* ``share``: the fraction of configurations whose best loss is at least
  :data:`DEEP_DECADES` below the census median (the goal is 3-15 %: rare, but there);
* ``gap_decades``: the census median minus the median best level of the good group that the
  analysis layer finds on the same curves (:func:`searcher.analysis.find_groups`); 0 when it
  finds none.  So the figure is met only when the analysis sees the group and the group as a
  whole sits far below the bulk.  ``shallowest_decades`` (median minus the group's shallowest
  member) and ``separation_decades`` (the gap between the group's shallowest member and the
  deepest configuration outside it) say how clean the edge is;
* ``best_values``, ``histogram`` (configurations per half decade) and the good group's
  configurations, for the record.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["census", "census_figures", "DEEP_DECADES", "SHARE_GOAL"]

DEEP_DECADES = 1.5
SHARE_GOAL = (0.03, 0.15)


def census(study_path, n: int, *, seed: int = 0, workers: int = 2, cache_dir=None,
           log=None) -> dict:
    """Train ``n`` random configurations of a study unpruned and describe their best losses.

    Args:
        study_path: the study YAML.
        n: configurations drawn (at least 60 for the demo's figure).
        seed: sample seed (configuration ``i`` trains with seed ``seed + i``).
        workers: training processes.
        cache_dir: ground-truth cache (default: the pruner benchmark's).
        log: progress lines.

    Returns:
        ``{"configs", "share", "gap_decades", "median", "shallowest_decades",
        "separation_decades", "best_values", "histogram",
        "good_group", "met", "cached", "seconds"}``.
    """
    from ._pruners import TRUTH_DIR, truth_curves

    truth = truth_curves(study_path, n, seed=seed, workers=workers,
                         cache_dir=cache_dir or TRUTH_DIR, log=log)
    figures = census_figures(truth["curves"])
    figures.update(cached=bool(truth.get("cached")), seconds=float(truth.get("seconds", 0.0)))
    return figures


def census_figures(curves) -> dict:
    """The census figures of a set of validation-loss curves (one per configuration).

    Args:
        curves: per configuration, its validation losses by epoch (NaN or inf where a run
            blew up).

    Returns:
        The dict of :func:`census` without ``cached`` and ``seconds``.
    """
    from searcher.analysis import find_groups

    curves = [np.asarray(c, dtype=float) for c in curves]
    best = np.array([np.nanmin(np.where(np.isfinite(c) & (c > 0), c, np.nan))
                     if np.isfinite(c).any() else np.nan for c in curves])
    logs = np.log10(best)
    med = float(np.nanmedian(logs))
    deep = logs <= med - DEEP_DECADES
    found = find_groups(curves)
    members = [i for i, lab in enumerate(found.labels) if found.good and lab == found.good]
    gap = float(med - np.nanmedian(logs[members])) if members else 0.0
    shallowest = float(med - np.nanmax(logs[members])) if members else 0.0
    rest = np.delete(logs, members)
    separation = float(np.nanmin(rest) - np.nanmax(logs[members])) \
        if members and np.isfinite(rest).any() else 0.0
    lo, hi = math.floor(np.nanmin(logs) * 2) / 2, math.ceil(np.nanmax(logs) * 2) / 2
    edges = np.arange(lo, hi + 0.5, 0.5)
    counts, _ = np.histogram(logs[np.isfinite(logs)], bins=edges)
    share = float(deep.mean())
    return {"configs": len(curves), "share": share, "gap_decades": gap, "median": med,
            "shallowest_decades": shallowest, "separation_decades": separation,
            "best_values": [float(v) for v in best],
            "histogram": [{"from": float(a), "to": float(b), "configs": int(c)}
                          for a, b, c in zip(edges[:-1], edges[1:], counts)],
            "good_group": {"configs": members, "note": found.note},
            "met": bool(SHARE_GOAL[0] <= share <= SHARE_GOAL[1] and gap >= DEEP_DECADES)}
