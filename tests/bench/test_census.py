"""The census figures on planted curve sets whose answer is known by construction."""
import numpy as np

from searcher.bench._census import DEEP_DECADES, census_figures


def _curves(finals, epochs=30):
    # exponential approach from 1 to the planted final level (derived: best = last value)
    t = np.arange(1, epochs + 1) / epochs
    return [np.exp(np.log(f) * (1 - np.exp(-6 * t)) / (1 - np.exp(-6))) for f in finals]


def test_rare_deep_group_is_counted_and_measured():
    rng = np.random.default_rng(3)
    bulk = 10 ** rng.uniform(-1.6, -1.0, size=54)
    deep = 10 ** np.array([-4.2, -4.1, -4.0, -4.0, -3.9, -3.8])
    fig = census_figures(_curves(np.concatenate([bulk, deep])))
    logs = np.log10(np.concatenate([bulk, deep]))
    med = np.median(logs)
    assert fig["configs"] == 60
    # derived: exactly the 6 planted configurations sit >= 1.5 decades below the median
    assert fig["share"] == 6 / 60
    assert sorted(fig["good_group"]["configs"]) == list(range(54, 60))
    np.testing.assert_allclose(fig["median"], med, atol=1e-9)
    np.testing.assert_allclose(fig["gap_decades"], med - np.median(logs[54:]), atol=1e-9)
    np.testing.assert_allclose(fig["shallowest_decades"], med + 3.8, atol=1e-9)
    np.testing.assert_allclose(fig["separation_decades"], logs[:54].min() + 3.8, atol=1e-9)
    assert sum(b["configs"] for b in fig["histogram"]) == 60
    assert fig["gap_decades"] >= DEEP_DECADES and fig["met"]


def test_a_continuum_is_not_met():
    # a smooth spread over three decades: no configuration set apart, so nothing is met
    finals = 10 ** np.linspace(-3.5, -0.5, 60)
    fig = census_figures(_curves(finals))
    # derived: the median is 10^-2 and only the endpoint 10^-3.5 lies 1.5 decades below it
    assert fig["share"] == 1 / 60
    assert not fig["met"]


def test_a_common_deep_group_is_not_rare():
    # derived: 30 of 60 deep configurations is a share of 0.5, outside 3-15 %
    finals = np.concatenate([np.full(30, 1e-1), np.full(30, 1e-4)]) * \
        10 ** np.random.default_rng(0).uniform(-0.1, 0.1, 60)
    fig = census_figures(_curves(finals))
    assert not fig["met"]
