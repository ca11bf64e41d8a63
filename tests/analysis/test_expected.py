"""Expected best of n trials, Wilson interval, trials to a first hit."""
from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from searcher.analysis import (bootstrap_band, expected_best, expected_best_curve,
                               trials_to_hit, wilson_interval)


def test_check_values_mirrored_for_losses():
    # Dodge et al. EMNLP 2019 (V) and Tang et al. ACL 2020 (U) for the maximum of [1,2,3,4]:
    # V 2.5, 3.125, 3.4375, 3.6171875; U 2.5, 10/3, 3.75, 4.0 (REFERENCES.md).  Losses
    # L = 5 - Y turn the maximum into a minimum: E[min L] = 5 - E[max Y].
    losses = [4, 3, 2, 1]
    v = [2.5, 3.125, 3.4375, 3.6171875]
    u = [2.5, 10 / 3, 3.75, 4.0]
    for n in range(1, 5):
        assert expected_best(losses, n) == pytest.approx(5 - v[n - 1])
        assert expected_best(losses, n, unbiased=True) == pytest.approx(5 - u[n - 1])
    assert expected_best_curve(losses) == pytest.approx([5 - x for x in v])
    assert expected_best_curve(losses, unbiased=True) == pytest.approx([5 - x for x in u])


@pytest.mark.parametrize("seed", range(4))
def test_brute_force_enumeration(seed):
    # Definition: V = mean of min over all ordered draws with replacement; U = mean of min
    # over all n-subsets without replacement (derived from the estimators' definitions).
    rng = np.random.default_rng(seed)
    losses = rng.exponential(size=5).round(2)   # rounding makes ties likely
    for n in range(1, 4):
        with_repl = np.mean([min(t) for t in itertools.product(losses, repeat=n)])
        subsets = np.mean([min(t) for t in itertools.combinations(losses, n)])
        assert expected_best(losses, n) == pytest.approx(with_repl)
        assert expected_best(losses, n, unbiased=True) == pytest.approx(subsets)


def test_uniform_closed_form():
    # E[max of n uniform(0,1)] = n/(n+1), so E[min] = 1/(n+1) (REFERENCES.md).  Tolerance:
    # five standard errors, using the U-statistic bound Var <= n Var(h) / N (Hoeffding 1948)
    # with Var(h) of the minimum of n uniforms = n/((n+1)^2 (n+2)) (Beta(1, n) variance).
    rng = np.random.default_rng(0)
    u = rng.uniform(size=4000)
    for n in (1, 2, 5, 20):
        sd = math.sqrt(n / ((n + 1) ** 2 * (n + 2)))
        assert abs(expected_best(u, n) - 1 / (n + 1)) < 5 * sd / math.sqrt(u.size) * math.sqrt(n)
        assert abs(expected_best(u, n, unbiased=True) - 1 / (n + 1)) < 5 * sd / math.sqrt(
            u.size) * math.sqrt(n)


def test_bad_input_and_band():
    with pytest.raises(ValueError):
        expected_best([1.0, math.inf], 1)
    with pytest.raises(ValueError):
        expected_best([1.0, 2.0], 3, unbiased=True)
    lo, hi = bootstrap_band([3.0, 1.0, 2.0, 5.0, 4.0], [1, 2, 5])
    mid = expected_best_curve([3.0, 1.0, 2.0, 5.0, 4.0], ns=[1, 2, 5])
    assert np.all(lo <= mid + 1e-12) and np.all(mid <= hi + 1e-12)


def test_wilson_textbook_value():
    # Wilson 1927 score interval; 81 of 263 -> 0.2553 to 0.3662 (Newcombe 1998 example;
    # memory, and it agrees with the closed form).
    lo, hi = wilson_interval(81, 263)
    assert (round(lo, 4), round(hi, 4)) == (0.2553, 0.3662)
    assert wilson_interval(0, 10)[0] == pytest.approx(0.0)
    assert wilson_interval(10, 10)[1] == pytest.approx(1.0)


def test_trials_to_first_hit():
    # log(1 - 0.95) / log(1 - 0.05) = 58.4 (REFERENCES.md); geometric mean 1/p = 20.
    res = trials_to_hit(0.05)
    assert res["for_confidence"] == pytest.approx(58.4, abs=0.05)
    assert res["mean"] == pytest.approx(20.0)
    assert trials_to_hit(0.0)["mean"] == math.inf
