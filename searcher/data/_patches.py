"""Patches: a large sample cut into spatially compact pieces with a halo.

``task.patches: {size: N, halo: H}`` cuts every sample with more than ``N`` nodes.  The core
nodes of the pieces come from recursive coordinate bisection (Berger & Bokhari 1987, IEEE
Trans. Computers 36): a set is split across its longest extent, at the rank that gives
each side a whole number of pieces, until each piece holds at most ``N`` nodes; so every
node is core in exactly one piece and pieces hold about ``N`` core nodes.  The cut uses no
randomness (stable sorts), so it is the same on every run.

Each piece then grows ``H`` graph hops of halo: the nodes that send messages to the piece
under the task's graph rule (or the file's mesh edges).  Halo nodes pass messages but carry
no loss and no metric: a piece's ``info["core"]`` is the per-node mask (True = core), kept
on the graph as ``core``.  Domain decomposition with ghost layers is how CFD codes cut a
mesh (common practice).

Memory: the cut needs only positions; halo hops query one cKDTree of the whole file; a
piece's edges are built when the piece is made, so :func:`iter_patches` and
:func:`iter_cut` hold one piece's edges at a time, and :class:`PatchCensus` counts core
cover from each piece's node indices as it passes (``data inspect`` surveys patched data
that way, see ``_survey.py``).
"""
from __future__ import annotations

from typing import Iterator

import numpy as np
from scipy.spatial import cKDTree

from searcher.data._demo import Sample
from searcher.data._graphs import build_edges

__all__ = ["bisect", "iter_patches", "iter_cut", "cut_samples", "PatchCensus", "patch_census"]


def bisect(pos: np.ndarray, size: int) -> list[np.ndarray]:
    """Recursive coordinate bisection of ``pos [N, 3]`` into pieces of at most ``size`` nodes.

    Returns:
        Node indices of each piece (sorted), pieces in a fixed depth-first order.

    Example:
        >>> [p.tolist() for p in bisect(np.array([[0., 0, 0], [3, 0, 0], [1, 0, 0], [2, 0, 0]]), 2)]
        [[0, 2], [1, 3]]
    """
    pieces, stack = [], [np.arange(len(pos))]
    while stack:
        idx = stack.pop()
        count = -(-len(idx) // size)   # pieces this set must become
        if count <= 1:
            pieces.append(np.sort(idx))
            continue
        sub = pos[idx]
        axis = int(np.argmax(sub.max(axis=0) - sub.min(axis=0)))
        left = count // 2
        rank = int(round(len(idx) * left / count))
        order = np.argsort(sub[:, axis], kind="stable")
        # Right first on the stack, so the left piece comes out first (depth-first order).
        stack.append(idx[order[rank:]])
        stack.append(idx[order[:rank]])
    return pieces


class _Senders:
    """Who sends messages to a set of nodes: the graph rule on a cKDTree, or mesh edges."""

    def __init__(self, pos: np.ndarray, graph: dict, edge_index: np.ndarray | None) -> None:
        self.graph, self.pos = graph, pos
        if edge_index is not None:
            from scipy.sparse import csr_matrix

            n = len(pos)
            ones = np.ones(edge_index.shape[1], dtype=bool)
            self.by_dst = csr_matrix((ones, (edge_index[1], edge_index[0])), shape=(n, n))
            self.tree = None
        else:
            self.tree, self.by_dst = cKDTree(pos), None

    def __call__(self, nodes: np.ndarray) -> np.ndarray:
        if len(nodes) == 0:
            return nodes
        if self.by_dst is not None:
            return np.unique(self.by_dst[nodes].indices)
        if self.graph["rule"] == "neighbours":
            k = min(int(self.graph["neighbours"]) + 1, len(self.pos))
            _, idx = self.tree.query(self.pos[nodes], k=k)
            return np.unique(np.asarray(idx).reshape(-1))
        found = self.tree.query_ball_point(self.pos[nodes], r=float(self.graph["radius"]))
        return np.unique(np.concatenate([np.asarray(f, dtype=np.int64) for f in found]))


def _sub_edges(edge_index: np.ndarray, nodes: np.ndarray, n: int) -> np.ndarray:
    local = np.full(n, -1, dtype=np.int64)
    local[nodes] = np.arange(len(nodes))
    src, dst = local[edge_index[0]], local[edge_index[1]]
    keep = (src >= 0) & (dst >= 0)
    return np.stack([src[keep], dst[keep]])


def iter_patches(sample: Sample, size: int, halo: int, graph: dict,
                 mesh_edges: bool = False, start: int = 0) -> Iterator[Sample]:
    """The pieces of ``sample`` one at a time (see the module docstring).

    Each piece keeps the sample's family (its case) and source; ``info`` holds ``core``
    (bool mask), ``patch`` (its number), ``patches`` (how many) and ``nodes`` (global node
    indices, core first).  A piece's ``edge_index`` is set: the file's mesh edges among its
    nodes when ``mesh_edges``, else the graph rule applied to its nodes.
    """
    n = len(sample.pos)
    pieces = bisect(sample.pos, int(size))
    edges = sample.edge_index if mesh_edges and sample.edge_index is not None else None
    senders = _Senders(sample.pos, graph, edges)
    for k, core in enumerate(pieces):
        seen = np.zeros(n, dtype=bool)
        seen[core] = True
        frontier, rings = core, [core]
        for _ in range(int(halo)):
            new = senders(frontier)
            new = new[~seen[new]]
            seen[new] = True
            rings.append(new)
            frontier = new
        nodes = np.concatenate(rings)
        mask = np.zeros(len(nodes), dtype=bool)
        mask[:len(core)] = True
        pos = sample.pos[nodes]
        values = {name: (v[nodes] if v.shape[0] == n and n > 1 else v)
                  for name, v in sample.fields.items()}
        dropped = 0
        if edges is not None:
            local = _sub_edges(edges, nodes, n)
        else:
            local, dropped = build_edges(pos, graph["rule"], graph["radius"],
                                         graph["neighbours"], int(graph["edge_cap"]))
        info = dict(sample.info, core=mask, patch=k, patches=len(pieces), nodes=nodes,
                    edges_dropped=dropped)
        yield Sample(pos, values, sample.family, start + k, sample.source, local, info)


def iter_cut(samples, task_cfg: dict) -> Iterator[Sample]:
    """Every sample with more than ``task.patches.size`` nodes replaced by its pieces, one
    piece at a time (pieces are numbered in order from 0)."""
    size = int(task_cfg["patches"]["size"])
    halo = int(task_cfg["patches"].get("halo", 0))
    graph, mesh = task_cfg["graph"], bool(task_cfg.get("mesh_edges"))
    made = 0
    for s in samples:
        if len(s.pos) <= size:   # one piece, all core, so every graph carries a mask
            n, dropped = len(s.pos), 0
            if mesh and s.edge_index is not None:
                edges = s.edge_index
            else:
                edges, dropped = build_edges(s.pos, graph["rule"], graph["radius"],
                                             graph["neighbours"], int(graph["edge_cap"]))
            made += 1
            yield Sample(s.pos, s.fields, s.family, made - 1, s.source, edges,
                         dict(s.info, core=np.ones(n, dtype=bool), patch=0, patches=1,
                              nodes=np.arange(n), edges_dropped=dropped))
            continue
        for piece in iter_patches(s, size, halo, graph, mesh, start=made):
            made += 1
            yield piece


def cut_samples(samples: list[Sample], task_cfg: dict) -> list[Sample]:
    """:func:`iter_cut` as a list (the samples unchanged when ``task.patches.size`` is 0)."""
    if int((task_cfg.get("patches") or {}).get("size", 0)) <= 0:
        return samples
    return list(iter_cut(samples, task_cfg))


class PatchCensus:
    """Patch count, core and halo sizes, and whether core nodes cover each file exactly
    once, counted piece by piece (a piece can be dropped once :meth:`add` has seen it).

    Args:
        file_nodes: source file → its node count.
    """

    def __init__(self, file_nodes: dict[str, int]) -> None:
        self.hits = {src: np.zeros(n, dtype=np.int32) for src, n in file_nodes.items()}
        self.patches = self.files_cut = self.core_max = 0
        self.core_total = self.halo_total = 0

    def add(self, piece: Sample) -> None:
        core = piece.info["core"]
        self.patches += 1
        self.files_cut += int(piece.info["patch"] == 0 and piece.info["patches"] > 1)
        np.add.at(self.hits[piece.source], piece.info["nodes"][core], 1)
        cores = int(core.sum())
        self.core_total += cores
        self.halo_total += len(core) - cores
        self.core_max = max(self.core_max, cores)

    def result(self) -> dict:
        exact = all(bool((h == 1).all()) for h in self.hits.values())
        n = max(self.patches, 1)
        return {"patches": self.patches, "files_cut": self.files_cut,
                "core_nodes_mean": self.core_total / n if self.patches else 0.0,
                "core_nodes_max": self.core_max,
                "halo_nodes_mean": self.halo_total / n if self.patches else 0.0,
                "core_cover_exact": exact}


def patch_census(samples, file_nodes: dict[str, int]) -> dict:
    """:class:`PatchCensus` over cut samples (pieces carry ``info["nodes"]`` and
    ``info["core"]``)."""
    census = PatchCensus(file_nodes)
    for s in samples:
        census.add(s)
    return census.result()
