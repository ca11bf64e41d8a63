"""Every registered pruner passes the shared replay check."""
from __future__ import annotations

import pytest

from searcher.search import PRUNERS
from searcher.testing import check_pruner_replay


@pytest.mark.parametrize("kind", sorted(PRUNERS))
def test_every_pruner_passes_the_replay_check(kind):
    summary = check_pruner_replay(kind)
    assert 0.0 < summary["epochs_ratio"] <= 1.0


def test_the_check_sees_pruning_and_no_pruning():
    # "none" spends every epoch; median compares at fixed epochs and cuts some crossing curves
    # (the slow starters sit above the stallers early on: searcher.testing.crossing_curves).
    assert check_pruner_replay("none")["epochs_ratio"] == 1.0
    assert check_pruner_replay("median", warmup=1)["pruned"] > 0
