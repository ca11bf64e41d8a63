"""Statistics across seeds: intervals, probability of outperforming, rank stability, transfer.

All scores are losses or errors: lower is better.  Small-n statistics are exact: P(A>B) has
a Clopper-Pearson interval and a sign-flip permutation p-value, rank correlations use
permutation (Spearman) or exact (Kendall) null distributions.  Mean intervals come from
``scipy.stats.bootstrap``; with fewer than :data:`BCA_MIN_SEEDS` seeds the bias-corrected
(BCa) interval is unstable, so the plain percentile method is used and the result says so.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass

import numpy as np
from scipy import stats

__all__ = ["BCA_MIN_SEEDS", "Interval", "MIN_CONFIGS", "MIN_SEEDS", "Outperform",
           "RankStability", "Transfer", "WEAK_TRANSFER", "exact_share_interval", "kendall_w",
           "p_outperform", "rank_stability", "seed_interval", "seeds_to_decide", "sign_flip_p",
           "transfer"]

BCA_MIN_SEEDS = 10
# Fewest paired seeds for a head-to-head verdict, and fewest configurations for a rank
# correlation that means something (ours; below these the dossier says the evidence is thin).
MIN_SEEDS = 5
MIN_CONFIGS = 5
MAX_SEEDS = 1000
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
    """P(A beats B) over paired seeds, its exact interval, a sign-flip p-value and the verdict.

    ``conclusion`` is ``"a"`` or ``"b"`` (a clear and meaningful win), ``"tied"`` (enough
    seeds, and the observed P(A>B) is not a meaningful difference) or ``"undecided"`` (fewer
    than ``min_seeds`` paired seeds, or a meaningful share not yet significant).
    ``seeds_needed`` is how many paired seeds, at the observed share of wins, would make the
    interval exclude 0.5 (None when tied or when no number up to :data:`MAX_SEEDS` would).
    """

    a: str
    b: str
    p: float
    low: float
    high: float
    n: int
    conclusion: str
    rule: str
    p_value: float | None = None
    min_seeds: int = 5
    seeds_needed: int | None = None
    interval: str = "Clopper-Pearson"
    note: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


def _wins(a, b, axis=-1):
    """Share of pairs where A's loss is lower; a tie counts one half."""
    return np.mean((a < b) + 0.5 * (a == b), axis=axis)


def exact_share_interval(wins: float, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Clopper-Pearson (1934) interval of a share from ``wins`` out of ``n``.

    The bounds are the Beta quantiles ``Beta(α/2; k, n−k+1)`` and ``Beta(1−α/2; k+1, n−k)``,
    the exact inversion of the binomial test; a tie counted as one half gives a half-integer
    ``k``, which the Beta form accepts.

    Example:
        >>> exact_share_interval(5, 5)[0] < 0.5 < exact_share_interval(6, 6)[0]
        True
    """
    if n <= 0:
        return 0.0, 1.0
    alpha = 1.0 - confidence
    low = 0.0 if wins <= 0 else float(stats.beta.ppf(alpha / 2, wins, n - wins + 1))
    high = 1.0 if wins >= n else float(stats.beta.ppf(1 - alpha / 2, wins + 1, n - wins))
    return low, high


def seeds_to_decide(share: float, confidence: float = 0.95, start: int = 1) -> int | None:
    """Smallest number of paired seeds (≥ ``start``) at which the same share of wins makes
    the exact interval exclude 0.5; None for a share within the tie band or beyond
    :data:`MAX_SEEDS`."""
    if not math.isfinite(share) or 1 - MEANINGFUL_P <= share <= MEANINGFUL_P:
        return None
    for n in range(max(1, start), MAX_SEEDS + 1):
        low, high = exact_share_interval(share * n, n, confidence)
        if low > 0.5 or high < 0.5:
            return n
    return None


def sign_flip_p(diff) -> float:
    """Two-sided p-value of a paired mean difference: exact sign-flip permutation test
    (``scipy.stats.permutation_test``, all ``2^n`` sign patterns for n ≤ 12)."""
    d = np.asarray(diff, dtype=float)
    if d.size == 0 or np.all(d == 0):
        return 1.0
    res = stats.permutation_test((d,), np.mean, permutation_type="samples",
                                 n_resamples=np.inf if d.size <= 12 else 9999,
                                 alternative="two-sided", rng=np.random.default_rng(0))
    return float(res.pvalue)


def p_outperform(a_losses, b_losses, *, a: str = "A", b: str = "B", confidence: float = 0.95,
                 min_seeds: int = MIN_SEEDS, resamples: int = RESAMPLES,
                 seed: int = 0) -> Outperform:
    """Probability that A outperforms B (lower loss) on the same seed.

    Bouthillier et al., MLSys 2021, "Accounting for Variance in Machine Learning Benchmarks":
    P(A>B) = (1/n) Σ_i 1[a_i beats b_i] over paired runs.  A is declared better when the
    interval's lower bound exceeds 0.5 and P > 0.75.  At the few seeds a dossier affords a
    bootstrap over the pairs is degenerate, so the interval is the exact Clopper-Pearson one
    of the share of wins, and no verdict is given below ``min_seeds`` paired seeds.

    Args:
        a_losses, b_losses: losses of A and B, one per seed, paired by position.
        a, b: labels used in the verdict.
        min_seeds: fewest paired seeds for a verdict other than ``undecided``.
        resamples, seed: kept for callers; the exact methods need no resampling.

    Example:
        >>> p_outperform([1.0, 1.0, 3.0], [2.0, 2.0, 2.0]).conclusion
        'undecided'
    """
    del resamples, seed
    x = np.asarray(list(a_losses), dtype=float)
    y = np.asarray(list(b_losses), dtype=float)
    if x.shape != y.shape:
        raise ValueError(f"paired seeds needed, got {x.size} and {y.size} values")
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    n = int(x.size)
    rule = (f"A better when P(A>B) > {MEANINGFUL_P} and the exact {confidence:.0%} interval's "
            f"lower bound > 0.5 (Bouthillier et al. 2021), over at least {min_seeds} paired "
            f"seeds; tied when P(A>B) is within [{1 - MEANINGFUL_P}, {MEANINGFUL_P}]")
    notes = [f"{int((~keep).sum())} unpaired seed(s) left out"] if not keep.all() else []
    if n == 0:
        return Outperform(a, b, math.nan, 0.0, 1.0, 0, "undecided", rule, None, min_seeds,
                          min_seeds, note="; ".join(notes + ["no paired seeds"]))
    p = float(_wins(x, y))
    low, high = exact_share_interval(p * n, n, confidence)
    p_value = sign_flip_p(x - y)
    needed = seeds_to_decide(p, confidence, start=max(n, min_seeds))
    if n < min_seeds:
        conclusion = "undecided"
        notes.append(f"{n} paired seed(s): a verdict needs at least {min_seeds}")
        needed = max(min_seeds, needed or min_seeds)
    elif low > 0.5 and p > MEANINGFUL_P:
        conclusion, needed = "a", None
    elif high < 0.5 and p < 1 - MEANINGFUL_P:
        conclusion, needed = "b", None
    elif 1 - MEANINGFUL_P <= p <= MEANINGFUL_P:
        conclusion = "tied"
    else:
        conclusion = "undecided"
        notes.append("a meaningful share of wins, not yet significant" if needed else
                     f"not decidable within {MAX_SEEDS} seeds at this share")
    return Outperform(a, b, p, low, high, n, conclusion, rule, p_value, min_seeds, needed,
                      note="; ".join(notes))


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
    """Rank correlation between search-time scores and dossier scores.

    ``p_value`` is Spearman's, from the exact permutation distribution (all n! orders up to
    n = 7); ``tau`` / ``tau_p`` are Kendall's with the exact null when there are no ties.
    ``too_thin`` is True below :data:`MIN_CONFIGS` configurations: the numbers are then given
    for the record and are not read as evidence either way.
    """

    rho: float | None
    p_value: float | None
    n: int
    weak: bool
    too_thin: bool = True
    tau: float | None = None
    tau_p: float | None = None
    method: str = "permutation"
    note: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


def _rho(x, y):
    return stats.spearmanr(x, y).statistic


def transfer(search_scores, dossier_scores, *, min_configs: int = MIN_CONFIGS) -> Transfer:
    """Does the cheap search-time score rank candidates as the full-fidelity dossier does?

    Spearman's rho with its permutation null from ``scipy.stats.permutation_test`` (exact over
    all orderings for n ≤ 7) and Kendall's tau with ``method="exact"`` (no ties) over the
    candidates having both scores.  Below ``min_configs`` the result is "too thin"; a weak
    (< 0.5) correlation on enough configurations is flagged: the search may have ranked on
    noise.
    """
    x = np.asarray(list(search_scores), dtype=float)
    y = np.asarray(list(dossier_scores), dtype=float)
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    n = int(x.size)
    thin = n < min_configs
    if n < 3 or np.all(x == x[0]) or np.all(y == y[0]):
        return Transfer(None, None, n, False, True, note=(
            f"too thin: not computable from {n} configuration(s) with varying scores"))
    exact = math.factorial(n) <= 5040
    # scipy.stats.permutation_test over pairings: the null distribution of rho under every
    # reordering of y (all n! of them up to n = 7).
    res = stats.permutation_test((x,), lambda u: _rho(u, y), permutation_type="pairings",
                                 n_resamples=np.inf if exact else 9999,
                                 alternative="two-sided", rng=np.random.default_rng(0))
    rho, p = float(_rho(x, y)), float(res.pvalue)
    ties = len(np.unique(x)) < n or len(np.unique(y)) < n
    kt = stats.kendalltau(x, y, method="auto" if ties else "exact")
    method = "exact permutation" if exact else "permutation (9999 resamples)"
    if thin:
        note = (f"too thin: {n} configurations (a rank correlation needs at least "
                f"{min_configs}); rho {rho:.2f} is shown for the record only, exact p = "
                f"{p:.3g}")
        return Transfer(rho, p, n, False, True, float(kt.statistic), float(kt.pvalue),
                        method, note)
    weak = rho < WEAK_TRANSFER
    note = (f"weak: rho {rho:.2f} < {WEAK_TRANSFER}; the search-time ranking did not carry "
            "over to full fidelity" if weak else "")
    return Transfer(rho, p, n, weak, False, float(kt.statistic), float(kt.pvalue), method,
                    note)
