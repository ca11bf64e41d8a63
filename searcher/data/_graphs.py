"""Graph construction: neighbour edges, centring, and ``torch_geometric`` records.

Edge convention: ``edge_index[0]`` = source ``j``, ``edge_index[1]`` = destination ``i``;
messages flow ``j → i`` and are aggregated at ``i``; ``edge_vec = pos[j] − pos[i]``.
"""
from __future__ import annotations

import warnings

import numpy as np
from scipy.spatial import cKDTree

__all__ = ["build_edges", "to_data", "graph_stats", "LongEdges", "warn_long_edges",
           "long_edge_counter", "long_edges", "check_cutoff", "RESERVED_NAMES"]

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


def _local(g, length: np.ndarray) -> np.ndarray:
    """Each edge's length over the mean length arriving at its receiver (the units of
    ``model.radial.scale: local``)."""
    if len(length) == 0:
        return length
    dst = g.edge_index[1].numpy()
    mean = np.bincount(dst, weights=length, minlength=g.num_nodes)[dst] / \
        np.bincount(dst, minlength=g.num_nodes)[dst]
    return np.divide(length, mean, out=np.zeros_like(length), where=mean > 0)


def _longest(g) -> tuple[float, float]:
    """Longest edge of a graph, absolute and in local units (:func:`_local`)."""
    length = g.edge_len.numpy().astype(np.float64)
    if len(length) == 0:
        return 0.0, 0.0
    return float(length.max()), float(_local(g, length).max())


def graph_stats(graphs) -> dict:
    """Nodes, edges, degrees and longest edges over ``Data`` records (isolated nodes are
    warned).

    ``graphs`` may be any iterable, read once: a generator of patches is summed up one
    graph at a time and never held whole.  ``edge_len_max`` is the longest edge;
    ``local_len_max`` the longest edge over the mean length arriving at its receiver.
    """
    n = edges_total = nodes_total = isolated = degree_max = 0
    nodes_min = edges_min = None
    nodes_max = edges_max = 0
    longest = local_longest = 0.0
    for g in graphs:
        nodes, edges = int(g.num_nodes), int(g.edge_index.shape[1])
        degree = np.bincount(g.edge_index[1].numpy(), minlength=nodes)
        n += 1
        nodes_total += nodes
        edges_total += edges
        nodes_min = nodes if nodes_min is None else min(nodes_min, nodes)
        edges_min = edges if edges_min is None else min(edges_min, edges)
        nodes_max, edges_max = max(nodes_max, nodes), max(edges_max, edges)
        isolated += int((degree == 0).sum())
        degree_max = max(degree_max, int(degree.max(initial=0)))
        far, far_local = _longest(g)
        longest, local_longest = max(longest, far), max(local_longest, far_local)
    if n == 0:
        return {"graphs": 0}
    if isolated:
        warnings.warn(f"{isolated} nodes have no incoming edge (they receive no messages); "
                      "raise task.graph.radius or use the neighbours rule", stacklevel=2)
    return {"graphs": n, "nodes_mean": nodes_total / n, "nodes_min": nodes_min,
            "nodes_max": nodes_max, "edges_mean": edges_total / n,
            "edges_min": edges_min, "edges_max": edges_max,
            "degree_mean": edges_total / nodes_total, "degree_max": degree_max,
            "isolated_nodes": isolated, "edge_len_max": longest, "local_len_max": local_longest}


class LongEdges:
    """Edges longer than a radial cutoff, counted graph by graph (a graph can be dropped
    once :meth:`add` has seen it, so a generator of patches is never held whole).

    The envelope takes such an edge's message to zero, so the graph rule joins nodes the
    model cannot hear (common with the neighbours rule, whose edges have no upper length).
    With ``scale: local`` lengths are counted in the mean length arriving at the receiver.

    Args:
        cutoff: the radial cutoff (in local units with ``scale: local``).
        scale: ``model.radial.scale``.

    Example:
        >>> counter = LongEdges(0.9)
        >>> counter.add(to_data(np.array([[0., 0, 0], [1, 0, 0]]), np.array([[0, 1], [1, 0]]),
        ...                     {}, "c", 0))
        >>> counter.result()
        {'cutoff': 0.9, 'scale': 'absolute', 'edges_over': 2, 'edges': 2, 'longest': 1.0}
    """

    def __init__(self, cutoff: float, scale: str = "absolute") -> None:
        self.cutoff, self.scale = float(cutoff), scale
        self.over = self.edges = 0
        self.longest = 0.0

    def add(self, g) -> None:
        length = g.edge_len.numpy().astype(np.float64)
        if self.scale == "local":
            length = _local(g, length)
        self.over += int((length > self.cutoff).sum())
        self.edges += len(length)
        self.longest = max(self.longest, float(length.max(initial=0.0)))

    def result(self) -> dict:
        return {"cutoff": self.cutoff, "scale": self.scale, "edges_over": self.over,
                "edges": self.edges, "longest": self.longest}

    def warn(self) -> int:
        """Warn once when any edge seen was too long; returns how many were."""
        if self.over:
            units = " mean local lengths" if self.scale == "local" else ""
            warnings.warn(f"{self.over} of {self.edges} edges are longer than "
                          f"model.radial.cutoff {self.cutoff:g}{units} (longest "
                          f"{self.longest:.4g}); the envelope silences their messages: raise "
                          "the cutoff or write model.radial.cutoff: from_data", stacklevel=2)
        return self.over


def warn_long_edges(graphs, cutoff: float, scale: str = "absolute") -> int:
    """Warn once when edges of ``graphs`` are longer than the radial cutoff
    (:class:`LongEdges` over every graph).

    Returns:
        How many edges are longer than ``cutoff``.
    """
    counter = LongEdges(cutoff, scale)
    for g in graphs:
        counter.add(g)
    return counter.warn()


def long_edge_counter(study) -> LongEdges | None:
    """A :class:`LongEdges` at the least cutoff the study's trials can take, or None when
    nothing is checked: ``from_data`` (it covers every edge), a derived cutoff, or a
    searched ``model.radial.scale`` (the units would change from trial to trial)."""
    if any(d.name == "model.radial.scale" for d in study.dimensions):
        return None
    cutoff = study.least("model.radial.cutoff")
    if cutoff is None:
        return None
    return LongEdges(float(cutoff), study.fixed()["model"]["radial"]["scale"])


def long_edges(study, graphs) -> dict | None:
    """:meth:`LongEdges.result` over ``graphs`` at the cutoff of :func:`long_edge_counter`,
    warned once; None when nothing is checked."""
    counter = long_edge_counter(study)
    if counter is None:
        return None
    for g in graphs:
        counter.add(g)
    counter.warn()
    return counter.result()


def check_cutoff(study, graphs) -> int:
    """How many edges of ``graphs`` are longer than the least cutoff the study's trials can
    take (:func:`long_edges`, warned once; 0 when nothing is checked)."""
    found = long_edges(study, graphs)
    return found["edges_over"] if found else 0
