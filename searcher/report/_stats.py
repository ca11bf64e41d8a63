"""Statistics across seeds: intervals, probability of outperforming, rank stability, transfer.

All scores are losses or errors: lower is better.  Intervals come from
``scipy.stats.bootstrap``; with fewer than :data:`BCA_MIN_SEEDS` seeds the bias-corrected
(BCa) interval is unstable, so the plain percentile method is used and the result says so.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass

import numpy as np
from scipy import stats

__all__ = ["BCA_MIN_SEEDS", "Interval", "Outperform", "RankStability", "Transfer",
           "WEAK_TRANSFER", "kendall_w", "p_outperform", "rank_stability", "seed_interval",
           "transfer"]

BCA_MIN_SEEDS = 10
# Bouthillier et al. (MLSys 2021): A is better when the interval's lower bound exceeds 0.5
# (significant) and P(A>B) exceeds 0.75 (meaningful).
MEANINGFUL_P = 0.75
WEAK_TRANSFER = 0.5
RESAMPLES = 4000


@dataclass(frozen=True)
class Interval:
    """Mean across seeds with a bootstrap interval.  ``method`` names how it was made."""

    mean: float
    low: float
    high: float
    n: int
    method: str
    confidence: float
    note: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


def seed_interval(values, *, confidence: float = 0.95, resamples: int = RESAMPLES,
                  seed: int = 0) -> Interval:
    """Mean of ``values`` and a bootstrap confidence interval of that mean.

    Non-finite values (a diverged seed) are left out and named in the note.

    Args:
        values: one number per seed.
        confidence: two-sided confidence level.
        resamples: bootstrap resamples.
        seed: seeds the resampling (same seed, same interval).

    Example:
        >>> seed_interval([1.0, 2.0, 4.0]).method
        'percentile'
    """
    arr = np.asarray(list(values), dtype=float)
    finite = arr[np.isfinite(arr)]
    notes = [f"{arr.size - finite.size} non-finite value(s) left out"] if finite.size < arr.size else []
    n = int(finite.size)
    if n == 0:
        return Interval(math.nan, math.nan, math.nan, 0, "none", confidence,
                        "; ".join(notes + ["no finite value"]))
    mean = float(finite.mean())
    if n == 1 or np.all(finite == finite[0]):
        why = "one seed: no spread to measure" if n == 1 else "all seeds equal"
        return Interval(mean, mean, mean, n, "none", confidence, "; ".join(notes + [why]))
    method = "BCa" if n >= BCA_MIN_SEEDS else "percentile"
    if method == "percentile":
        notes.append(f"{n} seeds: percentile bootstrap (BCa needs {BCA_MIN_SEEDS} or more)")
    res = stats.bootstrap((finite,), np.mean, n_resamples=resamples, method=method,
                          confidence_level=confidence, rng=np.random.default_rng(seed))
    ci = res.confidence_interval
    return Interval(mean, float(ci.low), float(ci.high), n, method, confidence, "; ".join(notes))


@dataclass(frozen=True)
class Outperform:
    """P(A beats B) over paired seeds with its bootstrap interval and the verdict."""

    a: str
    b: str
    p: float
    low: float
    high: float
    n: int
    conclusion: str          # "a", "b" or "neither"
    rule: str
    note: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


def _wins(a, b, axis=-1):
    """Share of pairs where A's loss is lower; a tie counts one half."""
    return np.mean((a < b) + 0.5 * (a == b), axis=axis)


def p_outperform(a_losses, b_losses, *, a: str = "A", b: str = "B", confidence: float = 0.95,
                 resamples: int = RESAMPLES, seed: int = 0) -> Outperform:
    """Probability that A outperforms B (lower loss) on the same seed.

    Bouthillier et al., MLSys 2021, "Accounting for Variance in Machine Learning Benchmarks":
    P(A>B) = (1/n) Σ_i 1[a_i beats b_i] over paired runs, with a percentile bootstrap interval
    over the pairs.  A is declared better when the lower bound exceeds 0.5 and P > 0.75.

    Args:
        a_losses, b_losses: losses of A and B, one per seed, paired by position.
        a, b: labels used in the verdict.

    Example:
        >>> p_outperform([1.0, 1.0, 3.0], [2.0, 2.0, 2.0]).p
        0.6666666666666666
    """
    x = np.asarray(list(a_losses), dtype=float)
    y = np.asarray(list(b_losses), dtype=float)
    if x.shape != y.shape:
        raise ValueError(f"paired seeds needed, got {x.size} and {y.size} values")
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    n = int(x.size)
    rule = (f"A better when the {confidence:.0%} interval's lower bound > 0.5 and "
            f"P(A>B) > {MEANINGFUL_P} (Bouthillier et al. 2021)")
    notes = [f"{int((~keep).sum())} unpaired seed(s) left out"] if not keep.all() else []
    if n == 0:
        return Outperform(a, b, math.nan, 0.0, 1.0, 0, "neither", rule,
                          "; ".join(notes + ["no paired seeds"]))
    p = float(_wins(x, y))
    if n == 1:
        low, high = 0.0, 1.0
        notes.append("one paired seed: the interval is the whole range")
    else:
        with warnings.catch_warnings():
            # All pairs agreeing makes the bootstrap distribution one point; that is the answer.
            warnings.simplefilter("ignore", stats.DegenerateDataWarning)
            res = stats.bootstrap((x, y), _wins, paired=True, vectorized=True,
                                  n_resamples=resamples, method="percentile",
                                  confidence_level=confidence, rng=np.random.default_rng(seed))
        low, high = float(res.confidence_interval.low), float(res.confidence_interval.high)
        if math.isnan(low):
            low = high = p
        if n < BCA_MIN_SEEDS:
            notes.append(f"{n} paired seeds: the percentile interval is optimistic")
    if low > 0.5 and p > MEANINGFUL_P:
        conclusion = "a"
    elif high < 0.5 and p < 1 - MEANINGFUL_P:
        conclusion = "b"
    else:
        conclusion = "neither"
    return Outperform(a, b, p, low, high, n, conclusion, rule, "; ".join(notes))


def kendall_w(scores) -> float:
    """Kendall's coefficient of concordance W of the rankings given by each seed.

    Kendall & Babington Smith (1939); with ties corrected by Σ(t³ − t) per seed.

    Args:
        scores: array ``[seeds, candidates]`` of losses; each row ranks the candidates.

    Returns:
        W in [0, 1]: 1 = every seed ranks the candidates the same way.
    """
    s = np.asarray(scores, dtype=float)
    m, n = s.shape
    ranks = np.vstack([stats.rankdata(row) for row in s])
    spread = float(((ranks.sum(axis=0) - m * (n + 1) / 2) ** 2).sum())
    ties = sum(float(((c := np.unique(row, return_counts=True)[1]) ** 3 - c).sum())
               for row in s)
    denom = m * m * (n ** 3 - n) - m * ties
    return 1.0 if denom == 0 else 12.0 * spread / denom


@dataclass(frozen=True)
class RankStability:
    """How consistently the seeds rank the candidates."""

    kendall_w: float | None
    same_order: float | None     # share of seeds whose order equals the order of the means
    seeds: int
    candidates: int
    note: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


def rank_stability(scores) -> RankStability:
    """Kendall's W and the share of seeds that reproduce the ranking of the means.

    Args:
        scores: ``[seeds, candidates]`` losses; rows with a non-finite value are left out.
    """
    s = np.asarray(scores, dtype=float)
    if s.ndim != 2:
        raise ValueError(f"scores must be [seeds, candidates], got shape {s.shape}")
    rows = s[np.all(np.isfinite(s), axis=1)]
    m, n = rows.shape if rows.size else (0, s.shape[1])
    if m < 2 or n < 2:
        return RankStability(None, None, m, n,
                             "needs at least 2 complete seeds and 2 candidates")
    order = np.argsort(rows.mean(axis=0), kind="stable")
    same = float(np.mean([np.array_equal(np.argsort(r, kind="stable"), order) for r in rows]))
    return RankStability(kendall_w(rows), same, m, n)


@dataclass(frozen=True)
class Transfer:
    """Spearman correlation between search-time scores and dossier scores."""

    rho: float | None
    p_value: float | None
    n: int
    weak: bool
    note: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


def transfer(search_scores, dossier_scores) -> Transfer:
    """Does the cheap search-time score rank candidates as the full-fidelity dossier does?

    ``scipy.stats.spearmanr`` over candidates having both scores.  Weak (< 0.5) or not
    computable correlations are flagged: the search may then have ranked on noise.
    """
    x = np.asarray(list(search_scores), dtype=float)
    y = np.asarray(list(dossier_scores), dtype=float)
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    n = int(x.size)
    if n < 3 or np.all(x == x[0]) or np.all(y == y[0]):
        return Transfer(None, None, n, True,
                        f"not computable from {n} candidate(s) with varying scores (need 3)")
    res = stats.spearmanr(x, y)
    rho, p = float(res.statistic), float(res.pvalue)
    note = (f"weak: rho {rho:.2f} < {WEAK_TRANSFER}; the search-time ranking did not carry "
            "over to full fidelity" if rho < WEAK_TRANSFER else "")
    return Transfer(rho, p, n, rho < WEAK_TRANSFER, note)
