"""Reference predictors on cases whose answer is known by hand."""
from __future__ import annotations

import numpy as np
import torch

from searcher.data import build_dataset
from searcher.report._references import C_MU, reference_modules, score_references
from searcher.train import evaluate

def _dataset(tmp_path):
    import yaml

    from searcher.spec import load_study
    from searcher.testing import tiny_study_doc

    path = tmp_path / "tiny.yaml"
    path.write_text(yaml.safe_dump(tiny_study_doc(output={"folder": str(tmp_path / "out")})))
    return build_dataset(load_study(path).fixed()["task"])


def test_zero_and_mean_predictors_by_hand(tmp_path):
    ds = _dataset(tmp_path)
    test = [ds.graphs[i] for i in ds.split["test"]]
    refs = reference_modules(ds)
    # derived: a zero prediction has relative L2 error |0 - t| / |t| = 1
    zero = evaluate(refs["zero"][1], test, ds)
    assert all(abs(v - 1.0) < 1e-9 for k, v in zero.items()
               if k.startswith("rel_l2/") and zero["measure/" + k[7:]] == "rel_l2")
    # derived: the training mean predictor's training-split MSE equals the per-component
    # variance of the target (the mean minimises squared error)
    train = [ds.graphs[i] for i in ds.split["train"]]
    t = torch.cat([getattr(g, ds.target.name) for g in train]).double()
    pred = refs["training mean"][1](type("B", (), {ds.target.name: t})())
    np.testing.assert_allclose(pred.numpy(), np.broadcast_to(t.mean(0).numpy(), t.shape))


def test_eddy_viscosity_matches_the_closure_formula(tmp_path):
    ds = _dataset(tmp_path)
    module = reference_modules(ds)["eddy viscosity"][1]
    g = ds.graphs[ds.split["test"][0]]
    got = ds.normaliser.invert(ds.target.name, module(g).double())
    s_hat = ds.normaliser.invert("scaled_strain", g.scaled_strain.double())
    # b = -C_mu * S_hat with C_mu = 0.09 (linear eddy viscosity, common practice)
    np.testing.assert_allclose(got.numpy(), -0.09 * s_hat.numpy(), atol=1e-6)
    assert C_MU == 0.09
    rows = score_references(ds)
    assert [r["name"] for r in rows] == ["zero", "training mean", "eddy viscosity"]
