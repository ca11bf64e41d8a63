"""The on-disk edge-geometry store: computed once, reused across trials, never stale."""
from __future__ import annotations

import copy
import dataclasses

import numpy as np
import pytest
import torch
from e3nn import o3

from searcher.data import build_dataset
from searcher.models import build_model
from searcher.testing import tiny_fit_config
from searcher.train import fidelity_graphs, fit
from searcher.train import _geometry_store as store


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    cfg = tiny_fit_config(seed=5, epochs=2)
    return cfg, build_dataset(cfg["task"], cache_dir=tmp_path_factory.mktemp("cache"))


def _model(cfg, data):
    torch.manual_seed(0)
    return build_model(cfg["model"], data.fields, data.target.name)


def _bessel_reference(edge_vec, radial) -> torch.Tensor:
    """The radial features written out in numpy float64, apart from the model's module.

    DimeNet (Klicpera et al., ICLR 2020, eqs. 7-8): the basis sqrt(2/c) sin(nπd/c)/d divided
    by its d → 0 limit, i.e. sin(nπd/c)/(nπd/c), times the polynomial envelope
    u(x) = 1 - (p+1)(p+2)/2 x^p + p(p+2) x^(p+1) - p(p+1)/2 x^(p+2) for x = d/c < 1, else 0.
    """
    assert radial["basis"] == "bessel" and radial["envelope"] == "polynomial"
    assert radial["scale"] == "absolute"
    d = np.linalg.norm(edge_vec.double().numpy(), axis=-1)[:, None]
    c, p = float(radial["cutoff"]), int(radial["power"])
    t = np.pi * np.arange(1, int(radial["count"]) + 1)[None, :] * d / c
    basis = np.where(t > 0, np.sin(t) / np.where(t > 0, t, 1.0), 1.0)
    x = d / c
    u = (1 - (p + 1) * (p + 2) / 2 * x ** p + p * (p + 2) * x ** (p + 1)
         - p * (p + 1) / 2 * x ** (p + 2)) * (x < 1)
    return torch.as_tensor(basis * u, dtype=torch.float32)


def _files(data):
    return sorted(data.cache_dir.glob("geometry-*.pt"))


def test_stored_arrays_are_the_models_geometry(setup):
    cfg, data = setup
    store._MEMORY.clear()
    model = _model(cfg, data)
    train, val = fidelity_graphs(data, cfg)
    graphs = store.with_geometry(model, data, cfg, train + val)
    assert len(_files(data)) >= 1
    for g, orig in zip(graphs, train + val):
        assert "edge_sh" not in orig  # the dataset's own graphs are not touched
        # Reference: e3nn.o3.spherical_harmonics of the edge vectors ('component'
        # normalisation of unit vectors) and DimeNet's radial basis written out in numpy.
        sh = o3.spherical_harmonics(model.geometry.sh.irreps_out, g.edge_vec,
                                    normalize=True, normalization="component")
        torch.testing.assert_close(g.edge_sh, sh)
        # tolerance: float32 rounding of the stored arrays (common practice)
        want = _bessel_reference(g.edge_vec, cfg["model"]["radial"])
        torch.testing.assert_close(g.edge_rbf, want, atol=1e-6, rtol=1e-5)
        assert g.edge_geometry == model.geometry.key


def test_trials_reuse_the_file_and_train_identically(setup):
    cfg, data = setup
    store._MEMORY.clear()
    for f in _files(data):
        f.unlink()
    first = fit(_model(cfg, data), data, cfg).curve
    (path,) = _files(data)
    stamp = path.stat().st_mtime_ns
    store._MEMORY.clear()                       # a new worker: only the file remains
    second = fit(_model(cfg, data), data, cfg).curve
    assert path.stat().st_mtime_ns == stamp     # read, not rewritten
    without = dataclasses.replace(data, cache_dir=None)
    store._MEMORY.clear()
    plain = fit(_model(cfg, data), without, cfg).curve
    assert first == second == plain             # the store changes no number


def test_other_settings_get_their_own_file(setup):
    cfg, data = setup
    store._MEMORY.clear()
    for f in _files(data):
        f.unlink()
    model = _model(cfg, data)
    train, val = fidelity_graphs(data, cfg)
    store.with_geometry(model, data, cfg, train + val)
    other = copy.deepcopy(cfg)
    other["model"]["radial"]["count"] = 6
    store.with_geometry(_model(other, data), data, other, train + val)
    assert len(_files(data)) == 2


def test_a_stale_file_is_recomputed(setup):
    cfg, data = setup
    store._MEMORY.clear()
    model = _model(cfg, data)
    train, val = fidelity_graphs(data, cfg)
    key = store.geometry_key(data, cfg, model.geometry, torch.float32, False)
    path = data.cache_dir / f"geometry-{key}.pt"
    torch.save({"counts": [1, 2, 3], "edge_sh": torch.zeros(6, 9),
                "edge_rbf": torch.zeros(6, 4)}, path)
    graphs = store.with_geometry(model, data, cfg, train + val)
    counts = [g.edge_vec.shape[0] for g in train + val]
    assert torch.load(path, weights_only=True)["counts"] == counts
    assert graphs[0].edge_sh.abs().sum() > 0
    path.write_bytes(b"not a torch file")
    store._MEMORY.clear()
    again = store.with_geometry(model, data, cfg, train + val)
    assert torch.equal(again[0].edge_sh, graphs[0].edge_sh)
