"""Direct collation against PyG's ``Batch.from_data_list`` (the reference library): the same
values, dtypes, key order, ``batch``/``ptr``, slice and increment records, and the same graphs
back from ``to_data_list``."""
from __future__ import annotations

import pytest
import torch
from torch_geometric.data import Batch, Data

from searcher.train import collate_graphs
from searcher.train._collate import flat_plan


def _graph(nodes: int, seed: int, **extra) -> Data:
    gen = torch.Generator().manual_seed(seed)
    edges = 3 * nodes
    data = Data(edge_index=torch.randint(0, nodes, (2, edges), generator=gen),
                pos=torch.randn(nodes, 3, generator=gen),
                edge_len=torch.rand(edges, generator=gen),
                anisotropy=torch.randn(nodes, 5, generator=gen, dtype=torch.float64),
                family="abc" if seed % 2 else "taylor-green", sample=seed,
                weight=0.5 * seed, keep=torch.rand(nodes, generator=gen) > 0.5,
                face_index=torch.randint(0, nodes, (3, 2), generator=gen))
    for key, value in extra.items():
        data[key] = value
    return data


def _eq(x, y) -> bool:
    if isinstance(y, torch.Tensor):
        return isinstance(x, torch.Tensor) and x.dtype == y.dtype and torch.equal(x, y)
    if isinstance(y, dict):
        return x.keys() == y.keys() and all(_eq(x[k], y[k]) for k in y)
    return x == y


def _same(a, b) -> None:
    assert list(a._store.keys()) == list(b._store.keys())  # stored order (keys() is a set)
    for key in b.keys():
        assert _eq(a[key], b[key]), key
    assert a.num_graphs == b.num_graphs
    assert a._slice_dict.keys() == b._slice_dict.keys()
    for key, ref in b._slice_dict.items():
        assert _eq(a._slice_dict[key], ref), key
        assert _eq(a._inc_dict[key], b._inc_dict[key]), key


@pytest.mark.parametrize("sizes", [(16,), (16, 16), (5, 12, 1, 9), (7, 3, 11, 2, 20, 4)])
def test_direct_collation_equals_pyg(sizes):
    graphs = [_graph(n, seed) for seed, n in enumerate(sizes)]
    assert flat_plan(graphs) is not None  # the direct path, not PyG's, is under test
    ours, ref = collate_graphs(graphs), Batch.from_data_list(graphs)
    _same(ours, ref)
    back, ref_back = ours.to_data_list(), ref.to_data_list()
    for g, r in zip(back, ref_back):
        assert all(_eq(g[key], r[key]) for key in r.keys())


def test_edge_indices_are_shifted_by_the_nodes_before_them():
    graphs = [_graph(n, seed) for seed, n in enumerate((4, 6, 3))]
    batch = collate_graphs(graphs)
    # derived: graph k's node i is row ptr[k] + i of the batch
    assert batch.ptr.tolist() == [0, 4, 10, 13]
    for k, g in enumerate(graphs):
        lo, hi = batch._slice_dict["edge_index"][k:k + 2].tolist()
        assert torch.equal(batch.edge_index[:, lo:hi], g.edge_index + batch.ptr[k])
        rows = batch.pos[batch.batch == k]
        assert torch.equal(rows, g.pos)


def test_plan_is_shared_by_every_batch_of_one_list():
    graphs = [_graph(n, seed) for seed, n in enumerate((4, 6, 3, 8))]
    plan = flat_plan(graphs)
    for part in (graphs[:2], graphs[2:], graphs[1:3]):
        _same(collate_graphs(part, plan), Batch.from_data_list(part))


@pytest.mark.parametrize("odd", [
    {"extra": {"stats": {"a": torch.zeros(1)}}},          # a mapping: PyG's recursive path
    {"extra": {"scalar": torch.tensor(3.0)}},             # 0-dim tensor: stacked, not cat
    {"extra": {"num_nodes": 16}},                         # PyG sums it
    {"missing": "weight"},                                # graphs with different keys
])
def test_graphs_that_are_not_flat_go_to_pyg(odd):
    graphs = [_graph(16, 0, **odd.get("extra", {})), _graph(8, 1, **odd.get("extra", {}))]
    if "missing" in odd:
        del graphs[1][odd["missing"]]
    assert flat_plan(graphs) is None
    try:
        ref = Batch.from_data_list(graphs)
    except Exception as err:  # PyG refuses it: so must we, with PyG's error
        with pytest.raises(type(err)):
            collate_graphs(graphs)
        return
    _same(collate_graphs(graphs), ref)


def test_training_batches_use_the_direct_path_on_demo_graphs(tmp_path):
    from searcher.data import build_dataset
    from searcher.models import build_model
    from searcher.testing import tiny_fit_config
    from searcher.train import collate

    cfg = tiny_fit_config(seed=3, epochs=1)
    dataset = build_dataset(cfg["task"], cache_dir=tmp_path)
    graphs = list(dataset.graphs)
    assert flat_plan(graphs) is not None
    _same(collate_graphs(graphs[:3]), Batch.from_data_list(graphs[:3]))
    # the trainer's batches (geometry attached afterwards) hold PyG's values
    model = build_model(cfg["model"], dataset.fields, dataset.target.name)
    for batch, k in zip(collate(model, graphs, 2), range(0, len(graphs), 2)):
        ref = Batch.from_data_list(graphs[k:k + 2])
        for key in ref.keys():
            if isinstance(ref[key], torch.Tensor):
                assert torch.equal(batch[key], ref[key]), key
