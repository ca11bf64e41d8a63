"""The replay check every registered pruner passes (a new pruner's test only names its kind).

:func:`check_pruner_replay` builds the pruner from a ``search.pruner`` mapping, as a study
would, and replays it twice over the same synthetic crossing curves.  It asserts what the
search contract promises of any pruner (DEVELOPERS.md, "Contracts/search"): the same curves in
the same order give the same decisions; no trial is cut at or after the last epoch, nor before
``min_epochs``; pruning never spends more epochs than no pruning; and the best finished curve
of the set survives whenever nothing was cut before the good group finished.
"""
from __future__ import annotations

import copy

__all__ = ["check_pruner_replay"]


def check_pruner_replay(kind: str, *, epochs: int = 12, seed: int = 0, **options) -> dict:
    """Replay the pruner ``kind`` twice and assert the contract; returns the summary.

    Args:
        kind: a name of :data:`searcher.search.PRUNERS`.
        epochs: length of each synthetic curve (the full budget).
        seed: curve and order seed.
        **options: ``search.pruner`` settings over ``defaults.yaml``'s.

    Example::

        check_pruner_replay("outlook", min_epochs=3)
    """
    from searcher.search import make_pruner
    from searcher.spec import defaults
    from searcher.testing._replay import crossing_curves, replay

    cfg = {**copy.deepcopy(defaults()["search"]["pruner"]), "max_epochs": epochs,
           "min_epochs": 2, **options, "kind": kind}
    curves, slow = crossing_curves(n_slow=2, n_fast=4, epochs=epochs, seed=seed)
    first = replay(curves, make_pruner(cfg), good=slow, seed=seed, label=kind)
    again = replay(curves, make_pruner(cfg), good=slow, seed=seed, label=kind)
    assert first.pruned_at == again.pruned_at, f"{kind}: decisions differ between replays"
    for at in first.pruned_at:
        assert at is None or 1 <= at < epochs, f"{kind}: pruned at epoch {at} of {epochs}"
        if kind in ("outlook", "halving", "hyperband"):
            assert at is None or at >= cfg["min_epochs"], \
                f"{kind}: pruned at epoch {at} before min_epochs {cfg['min_epochs']}"
    assert first.epochs <= first.epochs_full
    assert first.pruned == sum(at is not None for at in first.pruned_at)
    return first.summary()
