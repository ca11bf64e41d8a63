"""Graphs, splits, stress sets, normaliser, hash and cache of ``build_dataset``."""
from __future__ import annotations

import warnings

import numpy as np
import pytest
import torch
from scipy.spatial import distance_matrix
from scipy.spatial.transform import Rotation

from searcher.data import (Normaliser, build_dataset, build_edges, data_hash, describe_fields,
                           rotate_irreps)


def test_build_edges_radius_and_neighbours_match_brute_force():
    # Reference: scipy distance_matrix brute force (no self-loops, both directions).
    pos = np.random.default_rng(0).uniform(size=(14, 3))
    d = distance_matrix(pos, pos)
    ei, dropped = build_edges(pos, "radius", radius=0.4)
    want = {(j, i) for i in range(14) for j in range(14) if i != j and d[i, j] < 0.4}
    assert set(map(tuple, ei.T.tolist())) == want and dropped == 0
    ei, _ = build_edges(pos, "neighbours", neighbours=3)
    for i in range(14):
        src = ei[0, ei[1] == i]
        assert sorted(src) == sorted(np.argsort(d[i])[1:4])


def test_edge_cap_keeps_nearest_and_warns():
    pos = np.random.default_rng(1).uniform(size=(12, 3))
    full, _ = build_edges(pos, "radius", radius=2.0)
    with pytest.warns(UserWarning, match="dropped"):
        capped, dropped = build_edges(pos, "radius", radius=2.0, cap=4)
    # Hand computation: in the unit cube every distance is <= sqrt(3) < 2.0, so the radius
    # graph has all 12 * 11 directed pairs; the cap keeps 4 incoming edges on each of 12 nodes.
    assert dropped == full.shape[1] - capped.shape[1] == 12 * 11 - 12 * 4
    assert np.bincount(capped[1]).max() == 4


def test_dataset_contract(small_task):
    ds = build_dataset(small_task)
    g = ds.graphs[0]
    assert set(ds.fields) == {"velocity", "pressure", "pressure_gradient", "strain_rate",
                              "vorticity", "scaled_strain", "scaled_vorticity", "anisotropy"}
    assert ds.target.name == "anisotropy" and [f.name for f in ds.inputs] == [
        "velocity", "pressure", "pressure_gradient", "strain_rate", "vorticity",
        "scaled_strain", "scaled_vorticity"]
    assert g.strain_rate.shape == (14, 5) and g.vorticity.shape == (14, 3)
    assert g.pos.dtype == torch.float32 and g.pos.shape == (14, 3)
    torch.testing.assert_close(g.pos.mean(0), torch.zeros(3), atol=1e-6, rtol=0)
    src, dst = g.edge_index
    torch.testing.assert_close(g.edge_vec, g.pos[src] - g.pos[dst], atol=1e-6, rtol=0)
    torch.testing.assert_close(g.edge_len, g.edge_vec.norm(dim=1), atol=1e-6, rtol=0)
    assert g.anisotropy.shape == (14, 5) and g.pressure.shape == (14, 1)
    assert isinstance(g.family, str) and isinstance(g.sample, int)
    assert sorted(sum(ds.split.values(), [])) == list(range(len(ds.graphs)))
    assert ds.stats["split"] == {"train": 8, "val": 2, "test": 2}
    assert set(ds.stress) == {"rotated", "reflected", "translated", "denser", "sparser"}
    # Re-probed stress sets (searcher/data/_splits.py): 2x / 0.5x the 14 probes of the task.
    denser, sparser = 2.0, 0.5
    assert ds.stress["denser"][0].num_nodes == round(14 * denser)
    assert ds.stress["sparser"][0].num_nodes == round(14 * sparser)
    assert ds.stats["graphs"]["isolated_nodes"] == 0


def test_hold_out_goes_to_unseen_family(small_task):
    small_task["split"]["hold_out"] = ["sphere"]
    ds = build_dataset(small_task)
    assert {g.family for g in ds.stress["unseen_family"]} == {"sphere"}
    assert "sphere" not in {g.family for g in ds.graphs}


def _physical(ds, g, name):
    return ds.normaliser.invert(name, getattr(g, name).double()).numpy()


def test_stress_sets_transform_fields_by_their_irreps(small_task):
    # rotated/reflected: fields follow D(R) of their irreps (e3nn Irreps.D_from_matrix);
    # translated: shifted before centring, so centred positions and fields are unchanged.
    ds = build_dataset(small_task)
    test = [ds.graphs[i] for i in ds.split["test"]]
    for name, rot in (("reflected", lambda k: -np.eye(3)),
                      ("rotated", lambda k: None)):
        for k, (a, b) in enumerate(zip(test, ds.stress[name])):
            # recover R from positions (least squares, exact for a rigid map)
            r = rot(k)
            if r is None:
                r = np.linalg.lstsq(a.pos.double().numpy(), b.pos.double().numpy(), rcond=None)[0].T
            for f in ds.fields.values():
                np.testing.assert_allclose(rotate_irreps(f.irreps, _physical(ds, a, f.name), r),
                                           _physical(ds, b, f.name), atol=2e-5)
    for a, b in zip(test, ds.stress["translated"]):
        torch.testing.assert_close(a.pos, b.pos, atol=1e-5, rtol=0)
        torch.testing.assert_close(a.velocity, b.velocity)


def test_normaliser_preserves_equivariance():
    # Normalise then rotate == rotate then normalise (per-block scale, 0e-only mean), for a
    # scipy random rotation and a reflection; checked against e3nn D matrices.
    irreps = {"t": "0e+1o+2e", "p": "0o"}
    rng = np.random.default_rng(0)
    data = {"t": [rng.normal(size=(10, 9)) + 3], "p": [rng.normal(size=(10, 1)) + 3]}
    norm = Normaliser.fit(irreps, data)
    assert norm.blocks["p"][0]["mean"] == 0.0   # no mean on odd scalars
    for r in (Rotation.random(random_state=1).as_matrix(), -np.eye(3)):
        for k, ir in irreps.items():
            x = data[k][0]
            np.testing.assert_allclose(norm.apply(k, rotate_irreps(ir, x, r)),
                                       rotate_irreps(ir, norm.apply(k, x), r), atol=1e-12)
            np.testing.assert_allclose(norm.invert(k, norm.apply(k, x)), x, atol=1e-12)
    assert Normaliser.from_dict(norm.to_dict()) == norm


def test_normalised_train_blocks_have_unit_rms(small_task):
    # RMS norm of each block over the train split is 1 after normalisation (definition).
    ds = build_dataset(small_task)
    for name in ds.fields:
        x = torch.cat([getattr(ds.graphs[i], name) for i in ds.split["train"]]).double()
        assert float(x.pow(2).sum(1).mean().sqrt()) == pytest.approx(1.0, rel=1e-5)


def test_deterministic_by_seed_and_hash(small_task):
    a, b = build_dataset(small_task), build_dataset(small_task)
    assert a.hash == b.hash == data_hash(small_task)
    for ga, gb in zip(a.graphs, b.graphs):
        torch.testing.assert_close(ga.anisotropy, gb.anisotropy, rtol=0, atol=0)
    small_task["demo"]["seed"] = 4
    c = build_dataset(small_task)
    assert c.hash != a.hash and not torch.equal(c.graphs[0].pos, a.graphs[0].pos)
    small_task["fidelity"]["probes"] = 8   # fidelity is applied at training time
    assert data_hash(small_task) == c.hash


def test_cache_returns_identical_data(small_task, tmp_path):
    first = build_dataset(small_task, cache_dir=tmp_path)
    assert len(list(tmp_path.glob("data-*.npz"))) == 1
    again = build_dataset(small_task, cache_dir=tmp_path)
    assert again.split == first.split and again.stats == first.stats
    assert again.normaliser == first.normaliser and again.hash == first.hash
    for name in ["graphs"] + list(first.stress):
        xs = first.graphs if name == "graphs" else first.stress[name]
        ys = again.graphs if name == "graphs" else again.stress[name]
        for x, y in zip(xs, ys, strict=True):
            assert (x.family, x.sample) == (y.family, y.sample)
            for key in ("pos", "edge_index", "edge_vec", "edge_len", *first.fields):
                assert torch.equal(getattr(x, key), getattr(y, key))


def test_isolated_nodes_warned_and_no_edges_is_an_error(small_task):
    from searcher.errors import UserError

    small_task["graph"]["radius"] = 1.0
    with pytest.warns(UserWarning, match="no incoming edge"):
        build_dataset(small_task)
    small_task["graph"]["radius"] = 1e-6
    with warnings.catch_warnings(), pytest.raises(UserError, match="no edges"):
        warnings.simplefilter("ignore")
        build_dataset(small_task)


def test_describe_fields_demo(default_task):
    fields = describe_fields(default_task)
    assert {k: f.irreps for k, f in fields.items()} == {
        "velocity": "1o", "pressure": "0e", "pressure_gradient": "1o", "strain_rate": "2e",
        "vorticity": "1e", "scaled_strain": "2e", "scaled_vorticity": "1e",
        "anisotropy": "2e"}


def _build_into(task, cache_dir):
    build_dataset(task, cache_dir=cache_dir)


def test_simultaneous_builds_share_one_cache_file(small_task, tmp_path):
    # Workers of one study on one host build the same dataset at the same moment, in separate
    # processes; each must finish (own temporary file, atomic rename) and leave one readable
    # cache behind.  Processes, not threads: torch's default dtype is process-wide.
    import multiprocessing

    ctx = multiprocessing.get_context("fork")
    procs = [ctx.Process(target=_build_into, args=(small_task, tmp_path)) for _ in range(3)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(timeout=120)
    assert [p.exitcode for p in procs] == [0, 0, 0]
    assert len(list(tmp_path.glob("data-*.npz"))) == 1 and not list(tmp_path.glob("*.part.*"))
    first = build_dataset(small_task, cache_dir=tmp_path)
    assert first.hash == build_dataset(small_task).hash
