"""Graphs collated once into fixed batches, with the model's edge geometry cached.

Collating (:func:`collate_graphs`: PyG's ``Batch.from_data_list``, built directly) and
computing spherical harmonics and radial bases cost as much as a small model's forward
pass, so a training run does both once: the training graphs are split into fixed batches by
one seeded permutation, and each epoch only shuffles the *order* of those batches (with the
run's own ``torch.Generator``).  Batch membership is therefore fixed for a run; a different
seed gives different batches.
"""
from __future__ import annotations

import torch

from ._collate import collate_graphs, flat_plan

__all__ = ["collate", "TrainBatches"]


def _with_geometry(model: torch.nn.Module, batch):
    # Models with an equivariant edge embedding expose ``.geometry``; baselines do not.  The
    # batches are never changed afterwards, so the whole edge context is kept on them.
    if getattr(model, "geometry", None) is not None:
        from searcher.models import attach_geometry

        attach_geometry(model, batch, context=True)
    return batch


def collate(model: torch.nn.Module, graphs, batch_size: int, *, device="cpu",
            order=None) -> list:
    """Collate ``graphs`` into batches of at most ``batch_size`` graphs on ``device``.

    Args:
        model: the model the batches are for (its geometry settings are cached on them).
        graphs: list of ``Data``.
        batch_size: graphs per batch (>= 1).
        device: torch device of the batches.
        order: optional permutation of ``range(len(graphs))``.
    """
    idx = list(range(len(graphs))) if order is None else [int(i) for i in order]
    size = max(1, int(batch_size))
    plan = flat_plan(list(graphs))  # checked once for every batch
    # ``Batch.to`` walks and re-sets every attribute even when nothing moves
    move = bool(graphs) and any(v.device != torch.device(device) for v in graphs[0].values()
                                if isinstance(v, torch.Tensor))
    out = []
    for k in range(0, len(idx), size):
        batch = collate_graphs([graphs[i] for i in idx[k:k + size]], plan)
        out.append(_with_geometry(model, batch.to(device) if move else batch))
    return out


class TrainBatches:
    """Fixed training batches whose order is reshuffled every epoch.

    Args:
        model: the model being trained.
        graphs: training graphs.
        batch_size: graphs per batch.
        generator: seeded ``torch.Generator`` (membership now, order every epoch).
        device: torch device.
    """

    def __init__(self, model, graphs, batch_size: int, generator: torch.Generator,
                 device="cpu") -> None:
        order = torch.randperm(len(graphs), generator=generator).tolist()
        self.batches = collate(model, graphs, batch_size, device=device, order=order)
        self.generator = generator

    def epoch(self) -> list:
        """The batches in this epoch's order."""
        perm = torch.randperm(len(self.batches), generator=self.generator).tolist()
        return [self.batches[i] for i in perm]
