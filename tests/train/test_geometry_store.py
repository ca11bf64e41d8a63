"""The on-disk edge-geometry store: computed once, reused across trials, never stale."""
from __future__ import annotations

import copy
import dataclasses

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
        # normalisation of unit vectors) and the model's own radial embedding of |r|.
        sh = o3.spherical_harmonics(model.geometry.sh.irreps_out, g.edge_vec,
                                    normalize=True, normalization="component")
        torch.testing.assert_close(g.edge_sh, sh)
        torch.testing.assert_close(g.edge_rbf, model.geometry.radial(g.edge_vec.norm(dim=-1)))
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
