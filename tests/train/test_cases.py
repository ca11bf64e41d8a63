"""Per-case errors: patched cases put back together from their core nodes, each node once."""
from __future__ import annotations

import copy
import json

import numpy as np
import pytest
import torch
from torch_geometric.data import Batch

from searcher.data import build_dataset, build_edges, describe_fields, read_samples, to_data
from searcher.models import build_model
from searcher.testing import tiny_fit_config
from searcher.train import BlockErrors, case_errors, evaluate, fidelity_graphs, reassemble

HEADER = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
          "stress": {"kind": "symmetric_tensor", "role": "target", "level": "node"}}
NODES, LAYERS = 16, 1
# Hops a core node hears: the node attributes (mean edge SH: its own in-edges), each
# layer and the head each add one (searcher.models._equivariant; derived).
HOPS = LAYERS + 2


@pytest.fixture(scope="module")
def patched(tmp_path_factory):
    root = tmp_path_factory.mktemp("cases")
    for f in range(3):   # three files, three cases: split by case, one file per part
        rng = np.random.default_rng(10 + f)
        s = rng.normal(size=(NODES, 3, 3))
        np.savez(root / f"case{f}.npz", pos=rng.uniform(size=(NODES, 3)),
                 velocity=rng.normal(size=(NODES, 3)), stress=s + np.swapaxes(s, 1, 2),
                 header=np.array(json.dumps(HEADER)))
    cfg = tiny_fit_config()
    task = cfg["task"]
    task.update(source=str(root), fields={}, patches={"size": 5, "halo": HOPS})
    task["graph"].update(rule="neighbours", neighbours=3)
    task["split"].update(by="case", stress=[])
    cfg["model"].update(layers=LAYERS)
    ds = build_dataset(task)
    torch.manual_seed(0)
    model = build_model(cfg["model"], ds.fields, ds.target.name, stats=ds.stats["graphs"])
    return cfg, ds, model


def _whole(cfg, ds, model):
    """Each file as one uncut graph: case → (pred, true), normalised, in node order."""
    task = cfg["task"]
    out = {}
    for s in read_samples(task, describe_fields(task)):
        edges, _ = build_edges(s.pos, "neighbours", neighbours=3)
        g = to_data(s.pos, edges, {k: ds.normaliser.apply(k, v) for k, v in s.fields.items()},
                    s.family, 0)
        model.eval()
        with torch.no_grad():
            pred = model(Batch.from_data_list([g])).double()
        out[s.family] = (pred, g.stress.double())
    return out


def _measures(ds, pred, true):
    # The normalised MSE, and per irrep block of 0e + 2e the relative L2 error
    # ||pred_b - true_b|| / ||true_b|| of de-normalised values over all nodes of the set
    # (derived; the definitions of searcher.report's ERROR_DEFINITION)
    out = {"loss": float(((pred - true) ** 2).mean())}
    p, t = (ds.normaliser.invert("stress", x).numpy() for x in (pred, true))
    out.update({b: float(np.linalg.norm(p[:, sl] - t[:, sl]) / np.linalg.norm(t[:, sl]))
                for b, sl in (("0e", slice(0, 1)), ("2e", slice(1, 6)))})
    return out


def test_a_reassembled_case_has_every_node_once_and_the_uncut_error(patched):
    cfg, ds, model = patched
    p = ds.stats["patches"]
    assert p["patches"] == 12 and all("node" in g for g in ds.graphs)
    assert p["core_nodes_mean"] + p["halo_nodes_mean"] < NODES - 1   # real cuts, not copies
    rows = reassemble(model, ds.graphs, ds)
    whole = _whole(cfg, ds, model)
    errors = case_errors(model, ds.graphs, ds)
    assert sorted(rows) == sorted(whole) == sorted(errors) and len(rows) == 3
    for case, r in rows.items():
        np.testing.assert_array_equal(r.node, np.arange(NODES))   # each node once, in order
        assert r.files == [str(ds.graphs[0].source).rsplit("/", 1)[0] + f"/{case}.npz"]
        # A halo of as many hops as the model hears: a core node hears exactly what it hears
        # in the uncut graph, so the reassembled prediction is the uncut one (derived from
        # the halo rule of searcher.data._patches; float32 rounding only).
        pred, true = whole[case]
        np.testing.assert_allclose(r.pred.numpy(), pred.numpy(), rtol=1e-4, atol=1e-6)
        np.testing.assert_array_equal(r.true.numpy(), true.numpy())
        want = _measures(ds, pred, true)
        assert errors[case]["nodes"] == NODES and errors[case]["files"] == 1
        assert errors[case]["loss"] == pytest.approx(want.pop("loss"), rel=1e-4)
        for b, v in want.items():
            assert errors[case]["measure/" + b] == "rel_l2"
            assert errors[case]["rel_l2/" + b] == pytest.approx(v, rel=1e-4)


def test_test_metrics_count_core_nodes_only(patched):
    cfg, ds, model = patched
    test = [ds.graphs[i] for i in ds.split["test"]]
    (case,) = {g.family for g in test}
    want = _measures(ds, *_whole(cfg, ds, model)[case])
    got = evaluate(model, test, ds)
    assert got["loss"] == pytest.approx(want["loss"], rel=1e-4)
    for b in ("0e", "2e"):
        assert got["rel_l2/" + b] == pytest.approx(want[b], rel=1e-4)
    # Counting halo rows as well gives another loss, so the check above can fail.
    acc = BlockErrors(ds)
    model.eval()
    with torch.no_grad():
        for g in test:
            acc.add(model(Batch.from_data_list([g])), g.stress)
    assert acc.rows > NODES and abs(acc.loss - want["loss"]) > 1e-2 * want["loss"]


def test_a_node_core_twice_is_refused(patched):
    _, ds, model = patched
    with pytest.raises(ValueError, match="is core in two graphs"):
        reassemble(model, ds.graphs + [ds.graphs[0]], ds)


def test_node_indices_survive_the_cache_and_fewer_probes(patched, tmp_path):
    cfg, ds, model = patched
    build_dataset(cfg["task"], cache_dir=tmp_path)
    cached = build_dataset(cfg["task"], cache_dir=tmp_path)
    assert all(torch.equal(a.node, b.node) and a.source == b.source
               for a, b in zip(ds.graphs, cached.graphs))
    assert case_errors(model, cached.graphs, cached) == case_errors(model, ds.graphs, ds)
    low = copy.deepcopy(cfg)
    low["task"]["fidelity"]["probes"] = 4
    train, _ = fidelity_graphs(ds, low)
    for g, full in zip(train, [ds.graphs[i] for i in ds.split["train"]]):
        assert g.num_nodes == 4 == g.core.shape[0] == g.node.shape[0]
        keep = [int(np.flatnonzero(full.node.numpy() == n)[0]) for n in g.node.tolist()]
        assert torch.equal(g.core, full.core[keep])   # the mask follows the nodes kept
