"""Patches: recursive coordinate bisection with a halo; core nodes cover each file once."""
from __future__ import annotations

import json

import numpy as np
import torch

from searcher.data import build_dataset, build_edges
from searcher.data._demo import Sample
from searcher.data._patches import bisect, iter_patches
from searcher.train._metrics import core_rows

HEADER = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
          "stress": {"kind": "symmetric_tensor", "role": "target", "level": "node"}}
GRAPH = {"rule": "neighbours", "radius": 0.6, "neighbours": 3, "edge_cap": 0}


def _files(root, files=3, n=16):
    root.mkdir()
    for f in range(files):
        rng = np.random.default_rng(f)
        s = rng.normal(size=(n, 3, 3))
        np.savez(root / f"f{f}.npz", pos=rng.uniform(size=(n, 3)),
                 velocity=rng.normal(size=(n, 3)), stress=s + np.swapaxes(s, 1, 2),
                 header=np.array(json.dumps(HEADER)))
    return root


def test_bisection_of_a_line_gives_contiguous_pieces_of_at_most_size():
    # Berger & Bokhari (1987): cut at the median of the longest extent, recursively.
    x = np.random.default_rng(0).permutation(10).astype(float)
    pos = np.stack([x, np.zeros(10), np.zeros(10)], 1)
    pieces = bisect(pos, 3)
    assert len(pieces) == 4 and max(len(p) for p in pieces) <= 3   # ceil(10/3) = 4
    spans = sorted((pos[p, 0].min(), pos[p, 0].max(), len(p)) for p in pieces)
    assert sum(s[2] for s in spans) == 10
    for lo_hi, nxt in zip(spans, spans[1:]):
        assert lo_hi[1] < nxt[0]                                  # no interleaving
        assert lo_hi[1] - lo_hi[0] == lo_hi[2] - 1                # consecutive integers


def test_core_nodes_keep_their_full_neighbourhood_and_halo_is_masked():
    rng = np.random.default_rng(1)
    pos = rng.uniform(size=(16, 3))
    sample = Sample(pos, {"v": rng.normal(size=(16, 3))}, "case", 0, "f.npz")
    full, _ = build_edges(pos, "neighbours", neighbours=3)
    want = {(int(s), int(d)) for s, d in full.T}
    seen = np.zeros(16, dtype=int)
    for piece in iter_patches(sample, 5, 1, GRAPH):
        nodes, core = piece.info["nodes"], piece.info["core"]
        seen[nodes[core]] += 1
        assert core[:core.sum()].all() and not core[core.sum():].any()
        # Edges into a core node are exactly its edges in the uncut graph.
        got = {(int(nodes[s]), int(nodes[d])) for s, d in piece.edge_index.T if core[d]}
        assert got == {e for e in want if e[1] in set(nodes[core].tolist())}
        np.testing.assert_array_equal(piece.fields["v"], sample.fields["v"][nodes])
    assert (seen == 1).all()


def test_dataset_of_patches_is_deterministic_and_covers_every_file_once(tmp_path,
                                                                      default_task):
    task = json.loads(json.dumps(default_task))
    task.update(source=str(_files(tmp_path / "d")), patches={"size": 5, "halo": 1})
    task["graph"].update(rule="neighbours", neighbours=3)
    task["split"].update(stress=[], by="case")
    first, second = build_dataset(task), build_dataset(task)
    census = first.stats["patches"]
    assert census["patches"] == 12 and census["files_cut"] == 3   # 3 files · ceil(16/5)
    assert census["core_cover_exact"] and census["core_nodes_max"] <= 5
    assert all(torch.equal(a.pos, b.pos) and torch.equal(a.core, b.core)
               for a, b in zip(first.graphs, second.graphs))
    # Patches of one file share its case, so with split by case no file spans two parts.
    part = {first.graphs[i].family: k for k, idx in first.split.items() for i in idx}
    assert all(part[first.graphs[i].family] == k for k, idx in first.split.items() for i in idx)
    assert len(part) == 3
    # Halo rows are dropped from losses and metrics.
    g = first.graphs[0]
    assert core_rows(g, g.stress).shape[0] == int(g.core.sum()) < g.num_nodes
