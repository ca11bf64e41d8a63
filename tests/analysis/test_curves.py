"""Curve features and grouping on planted curve sets."""
from __future__ import annotations

import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score

from searcher.analysis import GOOD_LABEL, curve_features, find_groups, group_curves
from searcher.testing._planted import planted_curves


def test_adjusted_rand_reference_values():
    # sklearn documentation-style values listed in REFERENCES.md (ARI of identical labels = 1,
    # [0,0,1,2] vs [0,0,1,1] = 4/7): the yardstick below is itself checked first.
    assert adjusted_rand_score([0, 0, 1, 1], [0, 0, 1, 1]) == pytest.approx(1.0)
    assert adjusted_rand_score([0, 0, 1, 2], [0, 0, 1, 1]) == pytest.approx(4 / 7)


@pytest.mark.parametrize("noise,seed,rare", [(0.01, 0, 3), (0.01, 1, 9), (0.05, 2, 3),
                                             (0.05, 3, 6)])
def test_planted_groups_recovered(noise, seed, rare):
    # 300 curves from five generators; the deep group is 1-3% and ~30% of the rest are cut
    # at epoch 6 or 12 as a pruner would.  Adjusted Rand index (Hubert & Arabie 1985, via
    # sklearn) against the generators must reach 0.9.
    curves, kinds = planted_curves(n=300, rare=rare, noise=noise, seed=seed)
    assert any(len(c) < 18 for c in curves)
    found = find_groups(curves)
    assert adjusted_rand_score(kinds, found.labels) >= 0.9
    deep = {lab for lab, kind in zip(found.labels, kinds) if kind == "deep"}
    assert deep == {GOOD_LABEL}
    assert found.labels.count(GOOD_LABEL) == rare


def test_features_of_a_known_curve():
    # 1, 0.1, 0.01: every level is in decades (derived by hand).
    feats = curve_features([1.0, 0.1, 0.01])
    final, best, slope, mean, plateaus, osc, steepest = feats
    assert (final, best, mean) == pytest.approx((-2.0, -2.0, -1.0))
    assert slope == pytest.approx(-1.0 / np.log10(1.5))   # last two points, log-epoch axis
    assert plateaus == 0 and osc == pytest.approx(0.0)
    assert steepest == pytest.approx(1 / 3)


def test_blown_up_curve_saturates_and_non_finite_counts_as_blown_up():
    up = curve_features([1.0, 0.5, 1e3, np.inf])
    assert up[0] == pytest.approx(1.0)       # saturated one decade above the start
    assert up[1] == pytest.approx(np.log10(0.5))


def test_similar_curves_form_no_good_group():
    rng = np.random.default_rng(0)
    curves = [0.3 * np.arange(1, 19) ** -0.5 * np.exp(rng.normal(0, 0.02, 18)) for _ in range(40)]
    found = find_groups(curves)
    assert found.good is None and GOOD_LABEL not in found.labels
    assert "no distinct good group" in found.note


def test_group_curves_public_api_and_variable_lengths():
    deep = [np.geomspace(1, 1e-3, 10)] * 3
    flat = [np.full(n, 0.5) for n in (4, 7, 10, 10, 10, 10, 10, 10, 10)]
    labels = group_curves(deep + flat)
    assert labels[:3] == [GOOD_LABEL] * 3
    assert len(set(labels[3:])) == 1 and labels[3] != GOOD_LABEL


def test_lowest_group_that_is_the_bulk_is_not_the_good_group():
    # Nine similar curves and one that blew up: the nine are the study's bulk, not "a few
    # configurations two decades below the rest" (the rule stated in GOOD_RULE).
    rng = np.random.default_rng(0)
    bulk = [np.geomspace(1.0, 0.3, 12) * np.exp(rng.normal(0, 0.01, 12)) for _ in range(9)]
    result = find_groups(bulk + [np.geomspace(1.0, 1e5, 12)])
    assert result.good is None and "bulk" in result.note
    assert GOOD_LABEL not in result.labels


def test_minority_rule_reads_the_randomly_drawn_curves():
    # A model-based sampler that found the deep region spends most trials there: 2 of 10
    # random start-up trials are deep, and 20 of the 25 later ones.  Over all 35 curves the
    # deep group holds 22/35 = 63 % (> 50 %, derived), over the random ones 2/10 = 20 %.
    rng = np.random.default_rng(1)

    def curve(final):
        return np.geomspace(1.0, final, 12) * np.exp(rng.normal(0, 0.01, 12))

    drawn = [curve(1e-4) for _ in range(2)] + [curve(0.1) for _ in range(8)]
    guided = [curve(1e-4) for _ in range(20)] + [curve(0.1) for _ in range(5)]
    curves = drawn + guided
    mask = [True] * 10 + [False] * 25
    assert find_groups(curves).good is None
    found = find_groups(curves, drawn=mask)
    assert found.good == GOOD_LABEL
    assert [lab == GOOD_LABEL for lab in found.labels] == \
        [True] * 2 + [False] * 8 + [True] * 20 + [False] * 5
    # too few random curves (MIN_DRAWN): the rule falls back to all curves
    assert find_groups(curves, drawn=[True] * 4 + [False] * 31).good is None
