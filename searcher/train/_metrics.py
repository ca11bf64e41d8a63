"""Losses and per-irrep-block error measures of a model on a set of graphs.

Every target irrep block (``0e`` and ``2e`` of a symmetric tensor, say) gets its own relative
L2 error, computed on de-normalised values over all nodes (or graphs) of the set at once:
``||pred_b - true_b||_2 / ||true_b||_2``.  A block whose reference RMS is below
:data:`ZERO_BLOCK` times the RMS of the whole target (the trace of a traceless anisotropy, for
one) has no meaningful relative error; it reports its RMS error under the same key instead,
and :func:`evaluate` says which measure each block used.
"""
from __future__ import annotations

import math

import torch
from e3nn import o3

__all__ = ["target_blocks", "BlockErrors", "core_rows", "evaluate", "ZERO_BLOCK"]

# A block counts as zero when its RMS is below this fraction of the whole target's RMS.
ZERO_BLOCK = 1e-6


def target_blocks(irreps: str) -> list[tuple[str, slice]]:
    """Label and slice of every irrep block of a target, e.g. ``[("0e", 0:1), ("2e", 1:6)]``.

    A repeated irrep gets a numbered label (``0e``, ``0e_2``) so keys stay unique.
    """
    parsed = o3.Irreps(irreps)
    out, seen = [], {}
    for mul_ir, sl in zip(parsed, parsed.slices()):
        label = str(mul_ir.ir)
        seen[label] = seen.get(label, 0) + 1
        out.append((label if seen[label] == 1 else f"{label}_{seen[label]}", sl))
    return out


class BlockErrors:
    """Accumulates squared errors per block over batches (de-normalised) and the loss.

    Args:
        dataset: the dataset (its ``target`` field and ``normaliser`` are used).
    """

    def __init__(self, dataset) -> None:
        self.name = dataset.target.name
        self.normaliser = dataset.normaliser
        self.blocks = target_blocks(dataset.target.irreps)
        self.err = [0.0] * len(self.blocks)
        self.ref = [0.0] * len(self.blocks)
        self.sq_loss = 0.0
        self.rows = 0
        self.items = 0

    def add(self, pred: torch.Tensor, true: torch.Tensor) -> None:
        """Add one batch; ``pred`` and ``true`` are normalised, shape ``[rows, dim]``."""
        pred, true = pred.detach().double().cpu(), true.detach().double().cpu()
        self.sq_loss += float(((pred - true) ** 2).sum())
        self.items += true.numel()
        self.rows += true.shape[0]
        p = self.normaliser.invert(self.name, pred)
        t = self.normaliser.invert(self.name, true)
        for k, (_, sl) in enumerate(self.blocks):
            self.err[k] += float(((p[:, sl] - t[:, sl]) ** 2).sum())
            self.ref[k] += float((t[:, sl] ** 2).sum())

    @property
    def loss(self) -> float:
        """Mean squared error on the normalised target (the training loss)."""
        return self.sq_loss / self.items if self.items else float("nan")

    def measures(self) -> dict[str, tuple[str, float]]:
        """Block label → ``("rel_l2" | "rms", value)``."""
        rows = max(self.rows, 1)
        total_rms = math.sqrt(sum(self.ref) / rows / max(1, sum(
            sl.stop - sl.start for _, sl in self.blocks)))
        out = {}
        for k, (label, sl) in enumerate(self.blocks):
            width = sl.stop - sl.start
            ref_rms = math.sqrt(self.ref[k] / rows / width)
            if ref_rms <= ZERO_BLOCK * total_rms or self.ref[k] == 0.0:
                out[label] = ("rms", math.sqrt(self.err[k] / rows / width))
            else:
                out[label] = ("rel_l2", math.sqrt(self.err[k] / self.ref[k]))
        return out


def core_rows(batch, rows: torch.Tensor) -> torch.Tensor:
    """Only the core nodes' rows of a node-level tensor when the graphs are patches (their
    halo nodes pass messages but carry no loss or metric); anything else as given."""
    core = getattr(batch, "core", None)
    if core is None or rows.shape[0] != core.shape[0]:
        return rows
    return rows[core]


@torch.inference_mode()
def predict_errors(model: torch.nn.Module, batches, dataset) -> BlockErrors:
    """Run ``model`` over collated ``batches`` and accumulate :class:`BlockErrors`."""
    was_training = model.training
    model.eval()
    acc = BlockErrors(dataset)
    for batch in batches:
        acc.add(core_rows(batch, model(batch)), core_rows(batch, getattr(batch, acc.name)))
    model.train(was_training)
    return acc


def evaluate(model: torch.nn.Module, graphs, dataset, *, batch_size: int = 32) -> dict:
    """Test metrics of ``model`` on ``graphs``, per target irrep block.

    Args:
        model: a built model (see ``searcher.models.build_model``).
        graphs: list of ``Data`` from ``dataset`` (e.g. the test split or a stress set).
        dataset: the dataset they come from (target field and normaliser).
        batch_size: graphs per forward pass (only speed depends on it).

    Returns:
        ``{"loss": normalised MSE, "rel_l2/<block>": value, "measure/<block>": "rel_l2" or
        "rms", "graphs": count}``; for a near-zero block ``rel_l2/<block>`` holds its RMS error.

    Example:
        >>> evaluate(model, [dataset.graphs[i] for i in dataset.split["test"]], dataset)
        {'loss': 0.041, 'rel_l2/0e': 0.0003, 'measure/0e': 'rms', 'rel_l2/2e': 0.19, ...}
    """
    from ._batches import collate

    device = next(iter(model.parameters()), torch.empty(0)).device
    acc = predict_errors(model, collate(model, graphs, batch_size, device=device), dataset)
    out: dict = {"loss": acc.loss, "graphs": len(graphs)}
    for label, (measure, value) in acc.measures().items():
        out[f"rel_l2/{label}"] = value
        out[f"measure/{label}"] = measure
    return out
