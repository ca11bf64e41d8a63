"""graph_stats on hand-built graphs."""
from __future__ import annotations

import pytest
import torch
from torch_geometric.data import Data

from searcher.data._graphs import graph_stats


def _graph(xs, edges):
    pos = torch.tensor([[x, 0.0, 0.0] for x in xs])
    index = torch.tensor(edges, dtype=torch.long).T
    vec = pos[index[0]] - pos[index[1]]
    return Data(pos=pos, edge_index=index, edge_vec=vec, edge_len=vec.norm(dim=1))


def test_graph_stats_counted_by_hand():
    # Graph 1: 3 nodes, edges 0→1, 2→1, 1→0 (row 1 = destination): in-degrees 1, 2, 0.
    # Graph 2: 2 nodes, edges 0→1, 1→0: in-degrees 1, 1.
    # Nodes on a line at x = 0, 1, 3 and x = 0, 0.5.
    first, second = _graph([0, 1, 3], [[0, 1], [2, 1], [1, 0]]), _graph([0, 0.5], [[0, 1], [1, 0]])
    with pytest.warns(UserWarning, match="1 nodes have no incoming edge"):
        stats = graph_stats([first, second])
    # derived: nodes (3 + 2)/2, edges (3 + 2)/2, degrees (1+2+0+1+1)/5 = 1, node 2 isolated;
    # longest edge 2→1 of length 2; at node 1 the arriving lengths are 1 and 2 (mean 1.5),
    # so the longest local length is 2/1.5 = 4/3.
    local = stats.pop("local_len_max")
    assert stats == {"graphs": 2, "nodes_mean": 2.5, "nodes_min": 2, "nodes_max": 3,
                     "edges_mean": 2.5, "edges_min": 2, "edges_max": 3, "degree_mean": 1.0,
                     "degree_max": 2, "isolated_nodes": 1, "edge_len_max": 2.0}
    assert abs(local - 4 / 3) < 1e-6
    assert graph_stats([]) == {"graphs": 0}
