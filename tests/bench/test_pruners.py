"""bench_pruners on a tiny ground truth: structure, invariants, cache reuse, crossing count."""
from __future__ import annotations

import math

import numpy as np
import yaml

from searcher.bench._pruners import (_clairvoyant_ratio, _online_ratio, bench_pruners,
                                     crossing_pairs, format_bench_pruners, truth_curves)
from searcher.testing import replay_order
from searcher.testing import tiny_study_doc


def _tiny(tmp_path):
    doc = tiny_study_doc(study={"name": "tiny-bench"}, search={"pruner": {"kind": "outlook"}},
                         output={"folder": str(tmp_path / "out")})
    path = tmp_path / "tiny.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return path


def test_bench_pruners_tiny_ground_truth(tmp_path):
    path, cache = _tiny(tmp_path), tmp_path / "cache"
    out = bench_pruners(True, study_path=path, cache_dir=cache, workers=1, n=6, epochs=4,
                        log=lambda s: None)
    assert {"demo", "demo_warmup", "crossing", "call_cost"} <= set(out)
    for name in ("demo", "demo_warmup", "crossing"):
        row = out[name]
        if "pruners" not in row:          # every tiny run diverged: said so, nothing replayed
            assert row["notes"]
            continue
        table = row["pruners"]
        assert set(table) == {"none", "median", "hyperband", "outlook",
                              "outlook headroom=0"}
        # No pruning spends every epoch and keeps the best run (definition of the ratios).
        assert table["none"]["epochs_ratio"] == 1.0 and table["none"]["best_ratio"] == 1.0
        assert table["none"]["pruned"] == 0
        for r in table.values():
            assert 0.0 < r["epochs_ratio"] <= 1.0 and 0.0 <= r["wrongly_pruned_rate"] <= 1.0
            assert r["best_ratio"] >= 1.0 or math.isnan(r["best_ratio"])
            assert r["good_size"] >= 1
        assert row["crossing_pairs"] >= 0 and 0.0 < row["clairvoyant_epochs_ratio"] <= 1.0
        # Waiting for good finishers can only cost more than knowing everything at once.
        assert row["clairvoyant_epochs_ratio"] <= row["online_epochs_ratio"] <= 1.0
        assert isinstance(row["goal_met"], bool)
    assert out["crossing"]["pruners"]["none"]["good_size"] == 2
    text = format_bench_pruners(out)
    assert "[crossing]" in text and "outlook" in text
    # The ground truth is cached: the same key is read back, not retrained.
    again = truth_curves(path, 6, seed=0, epochs=4, cache_dir=cache, workers=1)
    assert again["cached"] and len(again["curves"]) == 6
    assert again["path"] == out["demo"].get("truth", again["path"])


def test_crossing_pairs_counts_order_swaps():
    # Hand count: a starts behind b and c and ends ahead of both (2 pairs); b and c keep
    # their order; d ties b within the noise at both ends (no pair).
    a = 10.0 ** np.array([-1.0, -4.0])
    b = 10.0 ** np.array([-2.0, -3.0])
    c = 10.0 ** np.array([-2.5, -3.5])
    d = 10.0 ** np.array([-2.01, -3.01])
    assert crossing_pairs([a, b, c], at=1) == 2
    assert crossing_pairs([b, d], at=1) == 0
    assert crossing_pairs([a, np.array([1.0])], at=2) == 0    # a diverged run is left out


def test_epoch_bounds_by_hand():
    # Four 10-epoch curves, one good; a pruner may act at epoch 2.  Clairvoyant: 10 + 3 x 2
    # = 16 of 40 epochs.  Waiting for one good finisher: every curve before the good one in
    # the replay order runs in full, the rest stop at 2 (hand count over the same order).
    curves = [np.ones(10) for _ in range(4)]
    good = np.array([False, False, True, False])
    assert _clairvoyant_ratio(curves, good, 2) == 16 / 40
    order = list(replay_order(4, seed=5))
    before = order.index(2)
    expected = (10 * before + 10 + 2 * (3 - before)) / 40
    assert _online_ratio(curves, good, 2, rank=1, seed=5) == expected
