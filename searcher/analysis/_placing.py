"""Placing cut curves: where a pruned trial's best loss would have ended, with its spread.

A pruned (or interrupted) curve stops early, so its best level is not comparable with the
best level of a trial that ran its planned epochs.  Its end is forecast from *look-alikes*:
the finished curves that sat closest to it over its last observed epochs.  Each look-alike
says how much further its own best level fell after that epoch; the cut curve's forecast is
its own best so far plus those falls (median), and the interval spans them, widened by how
far the look-alikes were from it.  A curve with fewer than :data:`MIN_LOOKALIKES` finished
curves long enough to compare, or none within :data:`MAX_DISTANCE` decades, cannot be
placed.

This is an empirical forecast, not a model of training: it assumes that curves which looked
alike up to the cut go on alike, which holds only as far as the finished curves span the
behaviours of the cut ones.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from searcher.analysis._curves import log_curve

__all__ = ["Forecast", "forecast_best", "MIN_LOOKALIKES", "MAX_DISTANCE", "LOOKALIKES"]

MIN_LOOKALIKES = 3
LOOKALIKES = 5
# Decades (RMS over the compared epochs) beyond which a finished curve is no look-alike.
MAX_DISTANCE = 0.5


@dataclass(frozen=True)
class Forecast:
    """Forecast best level of a cut curve, in log10 loss.

    Attributes:
        level: median of the look-alikes' forecasts.
        low, high: the interval (``high`` never above the level already reached).
        lookalikes: how many finished curves it rests on.
    """

    level: float
    low: float
    high: float
    lookalikes: int


def forecast_best(partial, finished) -> Forecast | None:
    """Forecast where the best level of ``partial`` would have ended.

    Args:
        partial: losses of a cut curve (``e`` epochs, e >= 1).
        finished: loss curves of trials that ran their planned epochs.

    Returns:
        the :class:`Forecast`, or None when the curve cannot be placed.

    Example:
        >>> t = np.arange(1, 19)
        >>> refs = [0.5 * t ** -2.0] * 3 + [0.3 + 0.1 / t] * 3
        >>> f = forecast_best((0.5 * t ** -2.0)[:6], refs)
        >>> round(f.level, 2), f.lookalikes
        (-2.81, 5)
    """
    y = log_curve(partial)
    e = y.size
    refs = [log_curve(c) for c in finished]
    refs = [r for r in refs if r.size > e]
    if len(refs) < MIN_LOOKALIKES:
        return None
    window = slice(max(0, e - (e // 2 + 1)), e)   # where the curve is now and its last slope
    dist = np.array([np.sqrt(np.mean((r[window] - y[window]) ** 2)) for r in refs])
    order = np.argsort(dist, kind="stable")[:LOOKALIKES]
    near = order[dist[order] <= MAX_DISTANCE]
    if near.size < MIN_LOOKALIKES:
        return None
    reached = float(y.min())
    falls = np.array([refs[i].min() - refs[i][:e].min() for i in near])
    spread = float(dist[near].mean())
    levels = reached + falls
    return Forecast(level=float(np.median(levels)), low=float(levels.min() - spread),
                    high=float(min(reached, levels.max() + spread)), lookalikes=int(near.size))
