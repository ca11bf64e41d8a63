"""Per-case errors: each case put back together from its graphs' core nodes.

A case (a sample's family: its file, or its sub-folder of files) may reach the model as
several patches (``task.patches``), whose halo nodes repeat nodes that are core in a
neighbouring patch.  :func:`reassemble` keeps the core rows of every graph, keyed by the
graph's file and each node's index in it (``Data.source`` and ``Data.node``, set on
patches by the data layer), and orders them by that key, so each node of a case counts
exactly once; :func:`case_errors` measures every case on those rows as :func:`evaluate`
measures a set of graphs.  A graph that is not a patch is its own piece, all core.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import torch

from ._metrics import BlockErrors

__all__ = ["CaseRows", "reassemble", "case_errors"]


@dataclass
class CaseRows:
    """One case's rows, each node once, ordered by ``(file, node)``.

    Attributes:
        files: the case's files (or ``sample <k>`` for a graph that is not a patch), in
            the order ``file`` numbers them.
        file: ``[n]`` index into ``files`` of each row.  node: ``[n]`` node index in it.
        pred, true: ``[n, dim]`` normalised predictions and targets (irreps basis).
    """

    files: list[str]
    file: np.ndarray
    node: np.ndarray
    pred: torch.Tensor
    true: torch.Tensor


def _pieces(batch, pred: torch.Tensor, name: str, node_level: bool):
    """``(family, file, node indices, pred rows, true rows)`` of every graph in ``batch``."""
    true = getattr(batch, name)
    ptr = batch.ptr.tolist()
    for g in range(batch.num_graphs):
        family = batch.family[g]
        if not node_level:   # a graph-level target: one row per graph
            yield family, f"sample {int(batch.sample[g])}", np.zeros(1, dtype=np.int64), \
                pred[g:g + 1], true[g:g + 1]
            continue
        rows = slice(ptr[g], ptr[g + 1])
        core = batch.core[rows] if "core" in batch else torch.ones(
            ptr[g + 1] - ptr[g], dtype=torch.bool, device=pred.device)
        node = batch.node[rows] if "node" in batch else torch.arange(
            ptr[g + 1] - ptr[g], device=pred.device)
        source = batch.source[g] if "source" in batch else f"sample {int(batch.sample[g])}"
        yield family, source, node[core].cpu().numpy(), pred[rows][core], true[rows][core]


@torch.inference_mode()
def reassemble(model: torch.nn.Module, graphs, dataset, *,
               batch_size: int = 32) -> dict[str, CaseRows]:
    """Predict ``graphs`` and put every case back together from its core nodes.

    Args:
        model: a built model.  graphs: ``Data`` from ``dataset``.  dataset: their dataset.
        batch_size: graphs per forward pass (only speed depends on it).

    Returns:
        case → :class:`CaseRows`, cases in name order.

    Raises:
        ValueError: a node that is core in two of the graphs (a case counted twice).
    """
    from ._batches import collate

    device = next(iter(model.parameters()), torch.empty(0)).device
    was_training = model.training
    model.eval()
    parts: dict[str, dict] = {}
    name, node_level = dataset.target.name, dataset.target.level == "node"
    for batch in collate(model, graphs, batch_size, device=device):
        for family, source, node, pred, true in _pieces(batch, model(batch), name, node_level):
            case = parts.setdefault(family, {"files": {}, "rows": []})
            number = case["files"].setdefault(source, len(case["files"]))
            case["rows"].append((np.full(len(node), number), node, pred.double().cpu(),
                                 true.double().cpu()))
    model.train(was_training)
    out = {}
    for family in sorted(parts):
        file, node, pred, true = (list(x) for x in zip(*parts[family]["rows"]))
        file, node = np.concatenate(file), np.concatenate(node)
        order = np.lexsort((node, file))
        file, node = file[order], node[order]
        twice = (file[1:] == file[:-1]) & (node[1:] == node[:-1])
        files = list(parts[family]["files"])
        if twice.any():
            k = int(np.argmax(twice))
            raise ValueError(f"node {int(node[k])} of {files[int(file[k])]} (case {family}) "
                             "is core in two graphs; each node must be core once")
        idx = torch.as_tensor(order)
        out[family] = CaseRows(files, file, node, torch.cat(pred)[idx], torch.cat(true)[idx])
    return out


def case_errors(model: torch.nn.Module, graphs, dataset, *, batch_size: int = 32) -> dict:
    """Error measures of every case of ``graphs`` over its reassembled rows.

    Returns:
        case → ``{"nodes": rows, "files": count, "loss": normalised MSE, "rel_l2/<block>":
        value, "measure/<block>": "rel_l2" or "rms"}`` (the keys of :func:`evaluate`).

    Example:
        >>> case_errors(model, [dataset.graphs[i] for i in dataset.split["test"]], dataset)
        {'hill': {'nodes': 4096, 'files': 1, 'loss': 0.05, 'rel_l2/0e': 0.21, ...}}
    """
    out = {}
    for family, rows in reassemble(model, graphs, dataset, batch_size=batch_size).items():
        acc = BlockErrors(dataset)
        acc.add(rows.pred, rows.true)
        entry = {"nodes": len(rows.node), "files": len(rows.files), "loss": acc.loss}
        for label, (measure, value) in acc.measures().items():
            entry[f"rel_l2/{label}"] = value
            entry[f"measure/{label}"] = measure
        out[family] = entry
    return out
