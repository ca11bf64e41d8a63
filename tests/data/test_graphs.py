"""graph_stats on hand-built graphs."""
from __future__ import annotations

import pytest
import torch
from torch_geometric.data import Data

from searcher.data._graphs import graph_stats


def _graph(n, edges):
    return Data(pos=torch.zeros(n, 3), edge_index=torch.tensor(edges, dtype=torch.long).T)


def test_graph_stats_counted_by_hand():
    # Graph 1: 3 nodes, edges 0→1, 2→1, 1→0 (row 1 = destination): in-degrees 1, 2, 0.
    # Graph 2: 2 nodes, edges 0→1, 1→0: in-degrees 1, 1.
    first, second = _graph(3, [[0, 1], [2, 1], [1, 0]]), _graph(2, [[0, 1], [1, 0]])
    with pytest.warns(UserWarning, match="1 nodes have no incoming edge"):
        stats = graph_stats([first, second])
    # derived: nodes (3 + 2)/2, edges (3 + 2)/2, degrees (1+2+0+1+1)/5 = 1, node 2 isolated
    assert stats == {"graphs": 2, "nodes_mean": 2.5, "nodes_min": 2, "nodes_max": 3,
                     "edges_mean": 2.5, "edges_min": 2, "edges_max": 3, "degree_mean": 1.0,
                     "degree_max": 2, "isolated_nodes": 1}
    assert graph_stats([]) == {"graphs": 0}
