"""Statistics across seeds, checked against scipy and hand-computed values."""
from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy import stats

from searcher.report import kendall_w, p_outperform, rank_stability, seed_interval, transfer
from searcher.report._stats import exact_share_interval, sign_flip_p


def test_percentile_interval_matches_scipy_bootstrap():
    values = [0.31, 0.27, 0.35, 0.30]
    got = seed_interval(values, seed=3, resamples=2000)
    # Reference: scipy.stats.bootstrap, same data, method and random generator.
    ref = stats.bootstrap((np.array(values),), np.mean, n_resamples=2000, method="percentile",
                          rng=np.random.default_rng(3)).confidence_interval
    assert got.method == "percentile" and "percentile bootstrap" in got.note
    assert got.low == pytest.approx(ref.low, abs=1e-12)
    assert got.high == pytest.approx(ref.high, abs=1e-12)
    assert got.mean == pytest.approx(np.mean(values))


def test_bca_interval_with_many_seeds_matches_scipy():
    values = np.random.default_rng(1).normal(1.0, 0.2, size=12)
    got = seed_interval(values, seed=5, resamples=2000)
    # Reference: scipy.stats.bootstrap default method (BCa).
    ref = stats.bootstrap((values,), np.mean, n_resamples=2000, method="BCa",
                          rng=np.random.default_rng(5)).confidence_interval
    assert got.method == "BCa"
    assert (got.low, got.high) == pytest.approx((ref.low, ref.high), abs=1e-12)


def test_three_seed_interval_spans_the_extremes():
    # Derived by enumeration: of the 3**3 = 27 equally likely resamples, "all minimum" and
    # "all maximum" each have probability 1/27 ≈ 3.7 % > 2.5 %, so the 95 % percentile
    # interval of the mean is exactly [min, max].
    got = seed_interval([1.0, 2.0, 4.0])
    assert (got.low, got.high) == pytest.approx((1.0, 4.0))


def test_interval_edge_cases_say_why():
    one = seed_interval([0.5])
    assert (one.low, one.high, one.method) == (0.5, 0.5, "none") and "one seed" in one.note
    nan = seed_interval([0.5, float("nan"), 0.7])
    assert nan.n == 2 and "non-finite" in nan.note


def test_p_outperform_hand_computed_example():
    a = [0.10, 0.20, 0.30, 0.40]
    b = [0.15, 0.18, 0.35, 0.40]
    got = p_outperform(a, b, a="F1", b="F2")
    # Hand computation: A wins seeds 1 and 3, loses seed 2, ties seed 4 (counts 1/2):
    # P(A>B) = (1 + 0 + 1 + 0.5) / 4 = 0.625 (Bouthillier et al., MLSys 2021, paired seeds).
    assert got.p == pytest.approx(0.625)
    # Reference interval: Clopper-Pearson through scipy.stats.beta quantiles (k = 2.5, n = 4).
    assert got.low == pytest.approx(stats.beta.ppf(0.025, 2.5, 2.5))
    assert got.high == pytest.approx(stats.beta.ppf(0.975, 3.5, 1.5))
    # 4 paired seeds: below the 5 a verdict needs.
    assert got.conclusion == "undecided" and got.seeds_needed >= 5


def test_exact_interval_matches_scipy_binomtest():
    # Reference: scipy.stats.binomtest(k, n).proportion_ci(method="exact") (Clopper-Pearson).
    for k, n in [(0, 5), (3, 5), (5, 5), (7, 10)]:
        ref = stats.binomtest(k, n).proportion_ci(0.95, method="exact")
        assert exact_share_interval(k, n) == pytest.approx((ref.low, ref.high))


def test_sign_flip_p_by_full_enumeration():
    # Derived by enumeration: 5 paired differences all of one sign; of the 2^5 = 32 sign
    # patterns only the two all-equal ones reach |mean| as large, so p = 2/32 = 1/16.
    assert sign_flip_p([0.1, 0.2, 0.1, 0.3, 0.2]) == pytest.approx(1 / 16)
    assert 0 < sign_flip_p([0.1, -0.1, 0.2]) <= 1


def test_p_outperform_rule_of_bouthillier():
    # memory (Bouthillier et al. 2021): better when lower bound > 0.5 and P(A>B) > 0.75.
    clear = p_outperform([0.1] * 8, [0.2] * 8)
    assert clear.p == 1.0 and clear.low > 0.5 and clear.conclusion == "a"
    reverse = p_outperform([0.3] * 8, [0.2] * 8)
    assert reverse.p == 0.0 and reverse.conclusion == "b"
    # Hand computation: a beats 0.2 (lower loss) on seeds 1, 3, 5, 6 and loses on 2, 4, so
    # P(A>B) = 4/6 ≈ 0.67, inside [0.25, 0.75]: tied by the rule above.
    mixed = p_outperform([0.1, 0.3, 0.1, 0.3, 0.1, 0.1], [0.2] * 6)
    assert mixed.p == pytest.approx(4 / 6) and mixed.conclusion == "tied"
    # Derived: 5 wins of 5 give the exact lower bound 0.025^(1/5) = 0.478 < 0.5, so not yet
    # significant: undecided, and 6 seeds would settle it (0.025^(1/6) = 0.541).
    five = p_outperform([0.1] * 5, [0.2] * 5)
    assert five.conclusion == "undecided" and five.seeds_needed == 6
    # Fewer than 5 paired seeds never decide, however one-sided.
    assert p_outperform([0.1] * 3, [0.2] * 3).conclusion == "undecided"


def test_kendall_w_hand_computed():
    # Hand computation (Kendall & Babington Smith 1939): rank sums 4, 6, 8, 12, mean 7.5,
    # S = 12.25 + 2.25 + 0.25 + 20.25 = 35, W = 12·35 / (3²·(4³ − 4)) = 420/540.
    scores = [[1, 2, 3, 4], [2, 1, 3, 4], [1, 3, 2, 4]]
    assert kendall_w(scores) == pytest.approx(420 / 540)


def test_kendall_w_identity_with_mean_spearman():
    # Textbook identity without ties (Kendall & Gibbons, "Rank Correlation Methods"):
    # W = ((m − 1)·mean pairwise Spearman rho + 1) / m; rho from scipy.stats.spearmanr.
    scores = np.random.default_rng(0).normal(size=(4, 5))
    rhos = [stats.spearmanr(scores[i], scores[j]).statistic
            for i, j in itertools.combinations(range(4), 2)]
    assert kendall_w(scores) == pytest.approx((3 * np.mean(rhos) + 1) / 4)


def test_rank_stability_counts_agreeing_seeds():
    scores = [[0.1, 0.2, 0.3], [0.1, 0.25, 0.2], [0.12, 0.2, 0.3]]
    got = rank_stability(scores)
    # Hand: mean order is (0, 1, 2); seeds 1 and 3 keep it, seed 2 swaps the last two.
    assert got.same_order == pytest.approx(2 / 3)
    assert rank_stability([[0.1, 0.2]]).kendall_w is None


def test_transfer_exact_at_small_n():
    # Derived by enumeration (REFERENCES.md): with n = 3 distinct ranks rho takes -1, -1/2,
    # 1/2, 1 with probabilities 1/6, 2/6, 2/6, 1/6, so the exact two-sided p of rho = 1 is 1/3.
    three = transfer([1, 2, 3], [1.1, 2.5, 2.9])
    assert three.rho == pytest.approx(1.0) and three.p_value == pytest.approx(1 / 3)
    assert three.too_thin and "too thin" in three.note
    # n = 4, rho = 1: exact two-sided p = 2/24 (one-sided 1/24, REFERENCES.md).
    four = transfer([1, 2, 3, 4], [1.1, 2.5, 2.9, 4.2])
    assert four.p_value == pytest.approx(2 / 24) and four.too_thin


def test_transfer_matches_permutation_spearmanr_and_flags_weak():
    search = [0.5, 0.4, 0.3, 0.6, 0.2, 0.7]
    dossier = [0.45, 0.41, 0.36, 0.30, 0.5, 0.2]
    got = transfer(search, dossier)
    # reference: scipy.stats.spearmanr for rho, and a full enumeration of the 6! orders of
    # the dossier scores for the exact two-sided p (derived)
    rho = stats.spearmanr(search, dossier).statistic
    null = [stats.spearmanr(search, perm).statistic
            for perm in itertools.permutations(dossier)]
    p_ref = np.mean(np.abs(null) >= abs(rho) - 1e-12)
    assert got.rho == pytest.approx(rho) and got.p_value == pytest.approx(p_ref)
    assert 0 < got.p_value < 1
    assert got.weak and "weak" in got.note and not got.too_thin
    few = transfer([1, 2], [1, 2])
    assert few.rho is None and few.too_thin and "too thin" in few.note
