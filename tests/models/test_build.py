"""build_model: shapes, batches, cached geometry, located errors."""
from __future__ import annotations

import pytest
import torch
from torch_geometric.data import Batch

from searcher.errors import UserError
from searcher.models import attach_geometry, build_model
from searcher.testing import make_fields, model_config, random_graph

FIELDS = make_fields()
GRAPH = make_fields({"velocity": ("vector", "input", "node"),
                     "drag": ("vector", "target", "graph")})
TINY = {"hidden.multiplicity": 2, "layers": 1, "radial.count": 4, "width": 8}


def test_batch_equals_graphs_one_by_one_with_instance_norm():
    model = build_model(model_config({**TINY, "norm": "instance", "node_inputs": ["velocity"]}),
                        GRAPH, "drag").double()
    graphs = [random_graph(GRAPH, 10, s, radius=0.5, dtype=torch.float64) for s in (0, 1)]
    out = model(Batch.from_data_list(graphs))
    assert out.shape == (2, 3)  # derived: 2 graphs, one 1o drag vector each
    # Per-graph norm and mean pooling: each graph's output ignores the other graph.
    # 1e-12: float64 sums in another order (common practice: a few hundred ulps of O(1) values)
    assert torch.allclose(out, torch.cat([model(g) for g in graphs]), atol=1e-12)


def test_cached_geometry_is_used_only_when_it_matches():
    model = build_model(model_config(TINY), FIELDS, "anisotropy")
    graph = random_graph(FIELDS, 12, 0, radius=0.5)
    plain = model(graph)
    attach_geometry(model, graph)
    assert graph.edge_sh.shape == (graph.edge_index.shape[1], 9)  # (lmax+1)² for lmax 2
    assert torch.equal(model(graph), plain)  # the same numbers, read from the cache
    graph.edge_sh = graph.edge_sh * 2  # proves the cached tensor is read
    assert not torch.allclose(model(graph), plain)
    graph.edge_geometry = "other settings"
    assert torch.allclose(model(graph), plain)


def test_errors_are_located_and_list_choices():
    with pytest.raises(UserError) as err:
        build_model(model_config({"family": "transformer"}), FIELDS, "anisotropy")
    assert all(name in str(err.value) for name in ("steerable", "gated", "node_mlp",
                                                    "coord_mlp", "transformer"))
    with pytest.raises(UserError) as err:
        build_model(model_config({"node_attrs": "field", "node_attr_field": "pressure"}),
                    FIELDS, "anisotropy")
    assert "model.node_attr_field" in str(err.value) and "velocity" in str(err.value)
    with pytest.raises(UserError) as err:  # 0e ⊗ SH(≤1) cannot reach 2e
        build_model(model_config({"hidden.lmax": 0, "edge_attrs.lmax": 1}), FIELDS,
                    "anisotropy")
    assert "2e" in str(err.value) and "model.hidden" in str(err.value)
