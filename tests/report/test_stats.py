"""Statistics across seeds, checked against scipy and hand-computed values."""
from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy import stats

from searcher.report import kendall_w, p_outperform, rank_stability, seed_interval, transfer


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
    got = p_outperform(a, b, a="F1", b="F2", seed=2, resamples=2000)
    # Hand computation: A wins seeds 1 and 3, loses seed 2, ties seed 4 (counts 1/2):
    # P(A>B) = (1 + 0 + 1 + 0.5) / 4 = 0.625 (Bouthillier et al., MLSys 2021, paired seeds).
    assert got.p == pytest.approx(0.625)
    # Reference interval: scipy.stats.bootstrap over the paired seeds, percentile method.
    wins = np.array([1.0, 0.0, 1.0, 0.5])
    ref = stats.bootstrap((wins,), np.mean, n_resamples=2000, method="percentile",
                          rng=np.random.default_rng(2)).confidence_interval
    assert (got.low, got.high) == pytest.approx((ref.low, ref.high), abs=1e-12)
    assert got.conclusion == "neither"


def test_p_outperform_rule_of_bouthillier():
    # memory (Bouthillier et al. 2021): better when lower bound > 0.5 and P(A>B) > 0.75.
    clear = p_outperform([0.1] * 8, [0.2] * 8)
    assert clear.p == 1.0 and clear.low > 0.5 and clear.conclusion == "a"
    reverse = p_outperform([0.3] * 8, [0.2] * 8)
    assert reverse.p == 0.0 and reverse.conclusion == "b"
    # Hand computation: a beats 0.2 (lower loss) on seeds 1, 3, 5, 6 and loses on 2, 4, so
    # P(A>B) = 4/6 ≈ 0.67 < 0.75: "neither" by the rule above.
    mixed = p_outperform([0.1, 0.3, 0.1, 0.3, 0.1, 0.1], [0.2] * 6)
    assert mixed.p == pytest.approx(4 / 6) and mixed.conclusion == "neither"


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


def test_transfer_matches_spearmanr_and_flags_weak():
    search = [0.5, 0.4, 0.3, 0.6]
    dossier = [0.45, 0.41, 0.36, 0.30]
    got = transfer(search, dossier)
    ref = stats.spearmanr(search, dossier)  # reference: scipy.stats.spearmanr
    assert got.rho == pytest.approx(ref.statistic) and got.p_value == pytest.approx(ref.pvalue)
    assert got.weak and "weak" in got.note
    strong = transfer([1, 2, 3, 4], [1.1, 2.5, 2.9, 4.2])
    assert strong.rho == pytest.approx(1.0) and not strong.weak
    few = transfer([1, 2], [1, 2])
    assert few.rho is None and few.weak and "not computable" in few.note
