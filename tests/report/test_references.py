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


def _files_with_a_baseline(root, factor):
    """Six NPZ cases whose baseline field is ``factor`` times the target, written with numpy."""
    import json

    header = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
              "b": {"kind": "traceless_symmetric_tensor", "role": "target", "level": "node"},
              "b_rans": {"kind": "traceless_symmetric_tensor", "role": "baseline",
                         "level": "node", "of": "b"}}
    root.mkdir()
    for k in range(6):
        rng = np.random.default_rng(k)
        s = rng.normal(size=(10, 3, 3))
        s = s + np.swapaxes(s, 1, 2)
        s -= np.trace(s, axis1=1, axis2=2)[:, None, None] * np.eye(3) / 3
        np.savez(root / f"case{k}.npz", pos=rng.uniform(size=(10, 3)),
                 velocity=rng.normal(size=(10, 3)), b=s, b_rans=factor * s,
                 header=np.array(json.dumps(header)))
    return root


def test_a_baseline_field_is_scored_as_a_reference(tmp_path):
    import json

    from searcher.spec import defaults

    task = json.loads(json.dumps(defaults()["task"]))
    task.update(source=str(_files_with_a_baseline(tmp_path / "d", 0.5)), fields={})
    task["graph"].update(rule="neighbours", neighbours=3)
    task["split"].update(stress=["rotated", "reflected"], hold_out=[])
    ds = build_dataset(task)
    assert ds.fields["b_rans"].role == "baseline" and ds.fields["b_rans"].of == "b"
    rows = {r["name"]: r for r in score_references(ds)}
    # derived: a prediction 0.5 b has relative L2 error |0.5 b − b| / |b| = 0.5 exactly, on
    # every split and on rotated/reflected copies (both fields turn together).
    assert rows["b_rans"]["kind"] == "field"
    assert abs(rows["b_rans"]["test_error"] - 0.5) < 1e-6
    assert all(abs(v - 0.5) < 1e-6 for v in rows["b_rans"]["stress"].values())
    assert "eddy viscosity" not in rows


def test_a_baseline_field_must_name_the_target(tmp_path):
    import yaml

    from searcher.cli import main

    root = _files_with_a_baseline(tmp_path / "d", 1.0)
    doc = {"task": {"source": str(root), "fields": {
        "velocity": {"kind": "vector", "role": "input"},
        "b": {"kind": "traceless_symmetric_tensor", "role": "target"},
        "b_rans": {"kind": "vector", "role": "baseline", "of": "velocity"}}}}
    path = tmp_path / "s.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    import io
    from contextlib import redirect_stderr

    err = io.StringIO()
    with redirect_stderr(err):
        code = main(["check", str(path)])
    assert code == 2
    text = err.getvalue()
    assert "task.fields.b_rans.of" in text and "allowed: b" in text and "s.yaml" in text
    assert "Traceback" not in text
