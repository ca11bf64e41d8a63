"""Low-fidelity views of a dataset for search trials (``task.fidelity``).

* ``train_fraction`` keeps the first ``ceil(f * n)`` training graphs of one permutation seeded
  by ``task.split.seed``, so every trial of a study sees the same subset.
* ``probes`` (> 0) keeps that many probes of every training and validation graph, chosen by
  a generator seeded with the graph's sample number, and rebuilds its edges with the study's
  graph rule; the test split and stress sets are never reduced.

``searcher.search.train_config(..., full_fidelity=True)`` skips both (finalist re-training).
"""
from __future__ import annotations

import math

import torch

__all__ = ["fidelity_graphs"]

_PRIME = 1_000_003


def _fewer_probes(graph, keep_n: int, node_fields: list[str], graph_cfg: dict):
    from searcher.data import build_edges

    n = int(graph.pos.shape[0])
    if keep_n >= n:
        return graph
    gen = torch.Generator().manual_seed(_PRIME * int(getattr(graph, "sample", 0)) + keep_n)
    keep = torch.randperm(n, generator=gen)[:keep_n].sort().values
    out = graph.clone()
    pos = graph.pos[keep]
    out.pos = pos - pos.mean(dim=0, keepdim=True)
    for name in node_fields + [a for a in ("core", "node") if a in graph]:
        setattr(out, name, getattr(graph, name)[keep])   # a patch's mask follows its nodes
    edge_index, _ = build_edges(out.pos.numpy(), graph_cfg["rule"], float(graph_cfg["radius"]),
                                int(graph_cfg["neighbours"]), int(graph_cfg["edge_cap"]))
    out.edge_index = torch.as_tensor(edge_index, dtype=torch.long)
    src, dst = out.edge_index
    out.edge_vec = out.pos[src] - out.pos[dst]
    out.edge_len = out.edge_vec.norm(dim=-1)
    return out


def fidelity_graphs(dataset, config: dict, *, full: bool = False) -> tuple[list, list]:
    """``(train_graphs, val_graphs)`` a trial trains and validates on.

    Args:
        dataset: a built dataset.
        config: the resolved config (``task.fidelity``, ``task.split.seed``, ``task.graph``).
        full: ignore ``task.fidelity`` (all graphs, all probes).
    """
    train_idx = list(dataset.split["train"])
    val_idx = list(dataset.split["val"])
    fid = config["task"]["fidelity"]
    if not full and float(fid["train_fraction"]) < 1.0:
        gen = torch.Generator().manual_seed(int(config["task"]["split"]["seed"]))
        keep = math.ceil(float(fid["train_fraction"]) * len(train_idx))
        train_idx = [train_idx[i] for i in torch.randperm(len(train_idx), generator=gen)
                     [:max(1, keep)].sort().values.tolist()]
    train = [dataset.graphs[i] for i in train_idx]
    val = [dataset.graphs[i] for i in val_idx]
    probes = int(fid["probes"])
    if not full and probes > 0:
        node_fields = [f.name for f in dataset.fields.values() if f.level == "node"]
        cfg = config["task"]["graph"]
        train = [_fewer_probes(g, probes, node_fields, cfg) for g in train]
        val = [_fewer_probes(g, probes, node_fields, cfg) for g in val]
    return train, val
