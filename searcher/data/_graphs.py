"""Graph construction: neighbour edges, centring, and ``torch_geometric`` records.

Edge convention: ``edge_index[0]`` = source ``j``, ``edge_index[1]`` = destination ``i``;
messages flow ``j → i`` and are aggregated at ``i``; ``edge_vec = pos[j] − pos[i]``.
"""
from __future__ import annotations

import warnings

import numpy as np
from scipy.spatial import cKDTree

__all__ = ["build_edges", "to_data", "graph_stats", "RESERVED_NAMES"]

# Attribute names a field may not take on a Data record.
RESERVED_NAMES = frozenset({"pos", "edge_index", "edge_vec", "edge_len", "family", "sample",
                            "batch", "ptr", "x", "y", "edge_attr", "edge_sh", "edge_rbf"})


def build_edges(pos, rule: str = "radius", radius: float = 0.6, neighbours: int = 12,
                cap: int = 0) -> tuple[np.ndarray, int]:
    """Neighbour edges by cKDTree, without self-loops.

    Args:
        pos: positions ``[N, 3]``.
        rule: ``"radius"`` (all pairs closer than ``radius``, both directions) or
            ``"neighbours"`` (each node receives from its ``neighbours`` nearest nodes).
        radius: cut-off distance of the radius rule.
        neighbours: k of the neighbours rule.
        cap: when > 0, each destination keeps at most its ``cap`` nearest sources.

    Returns:
        ``edge_index [2, E]`` (int64; row 0 source j, row 1 destination i) and the number of
        edges dropped by the cap.

    Example:
        >>> ei, dropped = build_edges(np.array([[0., 0, 0], [0.5, 0, 0], [3, 0, 0]]), radius=1)
        >>> ei.tolist(), dropped
        ([[1, 0], [0, 1]], 0)
    """
    pos = np.asarray(pos, dtype=np.float64)
    n = len(pos)
    tree = cKDTree(pos)
    if rule == "radius":
        pairs = tree.query_pairs(r=float(radius), output_type="ndarray")
        src = np.concatenate([pairs[:, 0], pairs[:, 1]])
        dst = np.concatenate([pairs[:, 1], pairs[:, 0]])
    elif rule == "neighbours":
        k = min(int(neighbours), n - 1)
        if k < 1:
            return np.zeros((2, 0), dtype=np.int64), 0
        _, idx = tree.query(pos, k=k + 1)
        dst = np.repeat(np.arange(n), k)
        src = idx[:, 1:].reshape(-1)   # column 0 is the point itself
    else:
        raise ValueError(f"graph rule must be 'radius' or 'neighbours'; got {rule!r}")
    src, dst, dropped = _cap(pos, src.astype(np.int64), dst.astype(np.int64), int(cap))
    order = np.lexsort((src, dst))   # sorted by destination, then source: deterministic
    return np.stack([src[order], dst[order]]), dropped


def _cap(pos, src, dst, cap):
    if cap <= 0 or len(src) == 0:
        return src, dst, 0
    dist = np.linalg.norm(pos[src] - pos[dst], axis=1)
    order = np.lexsort((src, dist, dst))   # per destination, nearest first
    src, dst = src[order], dst[order]
    first = np.searchsorted(dst, dst)   # index of each destination's first edge
    keep = (np.arange(len(dst)) - first) < cap
    dropped = int((~keep).sum())
    if dropped:
        warnings.warn(f"edge cap {cap} per node dropped {dropped} of {len(src)} edges",
                      stacklevel=3)
    return src[keep], dst[keep], dropped


def to_data(pos: np.ndarray, edge_index: np.ndarray, fields: dict[str, np.ndarray],
            family: str, sample: int):
    """A ``torch_geometric.data.Data`` from world positions and irreps-basis fields.

    Positions are centred on their mean (per graph) and stored float32, together with
    ``edge_vec = pos[j] − pos[i]`` and ``edge_len``; fields are stored float32 as given.
    """
    import torch
    from torch_geometric.data import Data

    centred = np.asarray(pos, dtype=np.float64) - np.mean(pos, axis=0)
    ei = np.asarray(edge_index, dtype=np.int64).reshape(2, -1)
    vec = centred[ei[0]] - centred[ei[1]]
    attrs = {name: torch.as_tensor(v, dtype=torch.float32) for name, v in fields.items()}
    return Data(pos=torch.as_tensor(centred, dtype=torch.float32),
                edge_index=torch.as_tensor(ei), edge_vec=torch.as_tensor(vec, dtype=torch.float32),
                edge_len=torch.as_tensor(np.linalg.norm(vec, axis=1), dtype=torch.float32),
                family=str(family), sample=int(sample), **attrs)


def graph_stats(graphs) -> dict:
    """Nodes, edges and degrees over a list of ``Data`` (isolated nodes are warned)."""
    if not graphs:
        return {"graphs": 0}
    nodes = np.array([g.num_nodes for g in graphs])
    edges = np.array([g.edge_index.shape[1] for g in graphs])
    degree = np.concatenate([np.bincount(g.edge_index[1].numpy(), minlength=g.num_nodes)
                             for g in graphs])
    isolated = int((degree == 0).sum())
    if isolated:
        warnings.warn(f"{isolated} nodes have no incoming edge (they receive no messages); "
                      "raise task.graph.radius or use the neighbours rule", stacklevel=2)
    return {"graphs": len(graphs), "nodes_mean": float(nodes.mean()), "nodes_min": int(nodes.min()),
            "nodes_max": int(nodes.max()), "edges_mean": float(edges.mean()),
            "edges_min": int(edges.min()), "edges_max": int(edges.max()),
            "degree_mean": float(degree.mean()), "degree_max": int(degree.max()),
            "isolated_nodes": isolated}
