"""Expected best loss of n trials, hit rates and the Wilson interval.

Expected maximum of n draws (Dodge et al., EMNLP 2019, V-statistic, draws with replacement)
and its unbiased form (Tang et al., ACL 2020, U-statistic, draws without replacement),
mirrored here for losses: with L(1) <= ... <= L(N) sorted ascending,

    V(n) = sum_i L(i) * [((N-i+1)/N)^n - ((N-i)/N)^n]
    U(n) = sum_i L(i) * C(N-i, n-1) / C(N, n)

Both assume independent draws from one fixed distribution; trials chosen by a model-based
sampler (TPE) are not independent, so their curve describes the pool of trials, not a
fresh search.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.special import gammaln
from scipy.stats import norm

__all__ = ["expected_best", "expected_best_curve", "wilson_interval", "trials_to_hit",
           "bootstrap_band"]


def _sorted(losses) -> np.ndarray:
    y = np.sort(np.asarray(losses, dtype=float).ravel())
    if y.size == 0 or not np.isfinite(y).all():
        raise ValueError(f"expected_best needs a non-empty list of finite losses, got {y!r}")
    return y


def _weights(n_total: int, ns: np.ndarray, unbiased: bool) -> np.ndarray:
    """``[len(ns), N]`` weights of the sorted losses for each n."""
    i = np.arange(1, n_total + 1)[None, :]
    n = ns[:, None].astype(float)
    if not unbiased:
        return ((n_total - i + 1) / n_total) ** n - ((n_total - i) / n_total) ** n
    k = n_total - i      # C(N-i, n-1) / C(N, n) in logs; zero where N-i < n-1
    ok = k >= n - 1
    lg = (gammaln(k + 1) - gammaln(n) - gammaln(np.maximum(k - n + 2, 1))
          - (gammaln(n_total + 1) - gammaln(n + 1) - gammaln(n_total - n + 1)))
    return np.where(ok, np.exp(np.where(ok, lg, 0.0)), 0.0)


def expected_best(losses, n: int, unbiased: bool = False) -> float:
    """Expected minimum loss of ``n`` trials drawn from ``losses``.

    Args:
        losses: finite losses of N trials.
        n: number of draws, 1..N (the V-statistic accepts any n >= 1).
        unbiased: U-statistic (draws without replacement) instead of the V-statistic.

    Example:
        >>> expected_best([1, 2, 3, 4], 2)     # 5 - 3.125, mirrored from Dodge et al.
        1.875
    """
    y = _sorted(losses)
    if n < 1 or (unbiased and n > y.size):
        raise ValueError(f"n must be in 1..{y.size} for the {'U' if unbiased else 'V'}"
                         f"-statistic, got {n}")
    return float(_weights(y.size, np.array([n]), unbiased)[0] @ y)


def expected_best_curve(losses, unbiased: bool = False, ns=None) -> np.ndarray:
    """``expected_best`` for every n in ``ns`` (default 1..N), in blocks to bound memory."""
    y = _sorted(losses)
    ns = np.arange(1, y.size + 1) if ns is None else np.asarray(ns, dtype=int)
    out = np.empty(ns.size)
    block = max(1, 4_000_000 // y.size)
    for start in range(0, ns.size, block):
        part = ns[start:start + block]
        out[start:start + block] = _weights(y.size, part, unbiased) @ y
    return out


def bootstrap_band(losses, ns, reps: int = 200, level: float = 0.9, seed: int = 0):
    """Approximate percentile band of the V-curve at ``ns`` from resampled trial sets."""
    y = _sorted(losses)
    rng = np.random.default_rng(seed)
    curves = np.array([expected_best_curve(rng.choice(y, y.size), ns=ns) for _ in range(reps)])
    tail = (1 - level) / 2 * 100
    return np.percentile(curves, tail, axis=0), np.percentile(curves, 100 - tail, axis=0)


def wilson_interval(hits: int, n: int, level: float = 0.95) -> tuple[float, float]:
    """Wilson (1927) score interval for a binomial proportion ``hits / n``.

    Example:
        >>> [round(v, 4) for v in wilson_interval(81, 263)]
        [0.2553, 0.3662]
    """
    if n <= 0:
        return 0.0, 1.0
    z = float(norm.ppf(0.5 + level / 2))
    p = hits / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z / (1 + z * z / n) * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    return max(0.0, centre - half), min(1.0, centre + half)


def trials_to_hit(p: float, confidence: float = 0.95) -> dict:
    """Trials until a first hit at success rate ``p``: mean 1/p (geometric) and the count
    that gives at least one hit with probability ``confidence``: log(1-c)/log(1-p)."""
    if p <= 0:
        return {"mean": math.inf, "for_confidence": math.inf, "confidence": confidence}
    if p >= 1:
        return {"mean": 1.0, "for_confidence": 1.0, "confidence": confidence}
    return {"mean": 1 / p, "for_confidence": math.log(1 - confidence) / math.log(1 - p),
            "confidence": confidence}
