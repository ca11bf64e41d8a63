"""Enrichment tests, rules and importance for the good group."""
from __future__ import annotations

from math import comb

import numpy as np
import pytest
from scipy.stats import false_discovery_control, fisher_exact, hypergeom

from searcher.analysis import enrichment, importances, read_trials, trait_rules
from searcher.testing._planted import planted_study


@pytest.fixture(scope="module")
def planted():
    store, kinds = planted_study(n=120, rare=6, seed=0)
    records = read_trials(store)
    return records, np.array([k == "deep" for k in kinds])


def test_fisher_reference_values():
    # scipy.stats.fisher_exact documentation example: [[8, 2], [1, 5]] -> odds ratio 20.0,
    # two-sided p ~= 0.03497.
    res = fisher_exact([[8, 2], [1, 5]])
    assert res.statistic == pytest.approx(20.0)
    assert res.pvalue == pytest.approx(0.03497, abs=5e-6)
    # One-sided: P(X >= 8) for X ~ hypergeometric(M=16, n=9, N=10) (scipy documentation's
    # relation between fisher_exact(alternative="greater") and hypergeom.sf).
    greater = fisher_exact([[8, 2], [1, 5]], alternative="greater").pvalue
    assert greater == pytest.approx(hypergeom.sf(7, 16, 9, 10))


def test_benjamini_hochberg_by_hand():
    # BH (Benjamini & Hochberg 1995): q_(i) = min_{j>=i} p_(j) * m / j.
    p = np.array([0.01, 0.04, 0.03, 0.20])
    order = np.argsort(p)
    ranked = p[order] * len(p) / np.arange(1, len(p) + 1)
    q = np.minimum.accumulate(ranked[::-1])[::-1]
    expected = np.empty_like(q)
    expected[order] = q
    assert false_discovery_control(p, method="bh") == pytest.approx(expected)


def test_planted_trait_found(planted):
    records, good = planted
    rows = enrichment(records, good)
    lmax2 = next(r for r in rows if r["parameter"] == "model.hidden.lmax" and r["value"] == "2")
    assert lmax2["q"] < 0.05 and lmax2["in_group"] == 1.0
    assert lmax2["overall"] == pytest.approx(
        np.mean([r.params["model.hidden.lmax"] == 2 for r in records]))
    # Second implementation: the one-sided Fisher p is the hypergeometric upper tail
    # P(X >= a) with the margins fixed (Fisher 1935; Agresti, Categorical Data Analysis,
    # 3.5.1), summed here in exact integers with math.comb.
    has = np.array([r.params["model.hidden.lmax"] == 2 for r in records])
    hits, with_value, group, total = int((has & good).sum()), int(has.sum()), int(good.sum()), \
        len(records)
    tail = sum(comb(with_value, k) * comb(total - with_value, group - k)
               for k in range(hits, min(with_value, group) + 1))
    assert lmax2["p"] == pytest.approx(tail / comb(total, group), rel=1e-9)
    assert all(0 <= r["q"] <= 1 for r in rows)


def _rank_sum_counts(total: int, size: int) -> dict[int, int]:
    """Number of ``size``-subsets of the ranks 1..total with each rank sum."""
    table = [dict() for _ in range(size + 1)]
    table[0][0] = 1
    for rank in range(1, total + 1):
        for k in range(min(rank, size), 0, -1):
            for s, c in table[k - 1].items():
                table[k][s + rank] = table[k].get(s + rank, 0) + c
    return table[size]


def test_numeric_effect_size_is_u_over_nm(planted):
    records, good = planted
    rows = enrichment(records, good)
    lr = next(r for r in rows if r["parameter"] == "training.learning_rate")
    x = np.array([r.params["training.learning_rate"] for r in records])
    inside, outside = x[good], x[~good]
    # U counts the pairs (inside, outside) with the inside value larger, a tie one half (Mann
    # & Whitney 1947), so U / (n m) is counted here pair by pair.
    pairs = inside[:, None] - outside[None, :]
    u = float((pairs > 0).sum() + 0.5 * (pairs == 0).sum())
    assert lr["effect"] == pytest.approx(u / (inside.size * outside.size), rel=1e-12)
    # Exact two-sided p (no ties; 6 in the group): 2 min(P(U <= u), P(U >= u)) under the null
    # that every 6-subset of the 120 ranks is equally likely (Mann & Whitney 1947), counted by
    # a subset-sum recursion over rank sums in exact integers.
    assert len(set(x)) == x.size
    n, m = inside.size, outside.size
    ways = _rank_sum_counts(n + m, n)
    u_counts = {s - n * (n + 1) // 2: c for s, c in ways.items()}
    everything = comb(n + m, n)
    below = sum(c for k, c in u_counts.items() if k <= u) / everything
    above = sum(c for k, c in u_counts.items() if k >= u) / everything
    assert lr["p"] == pytest.approx(min(1.0, 2 * min(below, above)), rel=1e-9)
    lo, hi = (float(v) for v in lr["value"].split(".."))
    assert lo == pytest.approx(x[good].min(), rel=1e-5) and hi == pytest.approx(x[good].max(),
                                                                            rel=1e-5)


def test_conditional_parameter_tested_where_active(planted):
    records, good = planted
    rows = enrichment(records, good)
    power = [r for r in rows if r["parameter"] == "model.radial.power"]
    active = sum("model.radial.power" in r.params for r in records)
    assert power and all(r["active_in"] == active for r in power)
    assert active < len(records)


def test_rules_are_readable_and_counted(planted):
    records, good = planted
    rules = trait_rules(records, good, "converges deep")
    assert 1 <= len(rules) <= 3
    top = rules[0]
    assert "model.hidden.lmax = 2" in top["rule"]
    # power is active exactly when basis = bessel, so either names the planted choice.
    assert ("model.radial.basis = bessel" in top["rule"]
            or "model.radial.power active" in top["rule"])
    assert top["rule"].endswith(f"{top['hits']} of {top['support']} in 'converges deep'")
    assert top["hits"] == good.sum() and top["precision"] == top["hits"] / top["support"]


def test_importance_both_senses(planted):
    records, good = planted
    imp = importances(records, good.mean())
    assert imp["top_quantile"] == pytest.approx(good.mean())
    assert set(imp["reaching_top"]) >= {"model.hidden.lmax", "model.radial.basis"}
    assert "model.radial.power" in imp["conditional"]
    # The planted rule decides the top, so PED-ANOVA ranks lmax or basis first.
    assert next(iter(imp["reaching_top"])) in ("model.hidden.lmax", "model.radial.basis")
    assert imp["global_variance"]
