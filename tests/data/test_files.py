"""File import (NPZ, VTU) and the ``searcher data`` command, including every bad-input error."""
from __future__ import annotations

import json

import meshio
import numpy as np
import pytest

from searcher.cli import main
from searcher.data import DEMO_FIELDS, build_dataset, demo_samples, describe_fields, read_samples

HEADER = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
          "stress": {"kind": "symmetric_tensor", "role": "target", "level": "node"}}


def _write(path, n=8, seed=0, **override):
    rng = np.random.default_rng(seed)
    s = rng.normal(size=(n, 3, 3))
    arrays = {"pos": rng.uniform(size=(n, 3)), "velocity": rng.normal(size=(n, 3)),
              "stress": s + np.swapaxes(s, 1, 2), "header": np.array(json.dumps(HEADER))}
    arrays.update(override)
    np.savez(path, **{k: v for k, v in arrays.items() if v is not None})
    return path


def _file_task(default_task, source, radius=5.0):
    task = json.loads(json.dumps(default_task))
    task["source"] = str(source)
    task["graph"]["radius"] = radius
    return task


def test_export_reads_back_through_the_npz_reader(tmp_path, default_task, capsys):
    assert main(["data", "export", "demo", "--graphs", "4", "--seed", "2",
                 "--out", str(tmp_path)]) == 0
    assert len(list(tmp_path.glob("*.npz"))) == 4
    demo = dict(default_task["demo"], samples=4, seed=2)
    want = demo_samples(demo)
    task = _file_task(default_task, tmp_path)
    fields = describe_fields(task)   # kinds come from the NPZ header
    assert {k: f.kind for k, f in fields.items()} == {f.name: f.kind for f in DEMO_FIELDS}
    got = read_samples(task, fields)
    for a, b in zip(want, got, strict=True):
        np.testing.assert_allclose(b.pos, a.pos, atol=1e-15)
        for name in a.fields:
            np.testing.assert_allclose(b.fields[name], a.fields[name], atol=1e-14)


def test_inspect_demo_and_path(tmp_path, capsys):
    assert main(["data", "inspect", "demo", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["stats"]["samples"] == 48
    assert {f["name"]: f["irreps"] for f in report["fields"]}["anisotropy"] == "2e"
    for i in range(4):
        _write(tmp_path / f"g{i}.npz", seed=i)
    assert main(["data", "inspect", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "stress" in out and "symmetric_tensor" in out and "0e+2e" in out
    assert "denser skipped: file data cannot be re-probed" in out


def test_2d_npz_and_vtu_with_mesh_edges(tmp_path, default_task):
    rng = np.random.default_rng(0)
    for i in range(3):
        _write(tmp_path / f"p{i}.npz", seed=i, pos=rng.uniform(size=(8, 2)),
               velocity=rng.normal(size=(8, 2)))
    ds = build_dataset(_file_task(default_task, tmp_path))
    assert ds.graphs[0].pos.shape == (8, 3) and float(ds.graphs[0].pos[:, 2].abs().max()) == 0
    vtu = tmp_path / "vtu"
    vtu.mkdir()
    for i in range(3):
        pts = rng.uniform(size=(5, 3))
        s = rng.normal(size=(5, 3, 3))
        meshio.write(vtu / f"m{i}.vtu", meshio.Mesh(
            pts, [("tetra", np.array([[0, 1, 2, 3]])), ("line", np.array([[3, 4]]))],
            point_data={"velocity": rng.normal(size=(5, 3)),
                        "stress": (s + np.swapaxes(s, 1, 2)).reshape(5, 9)}))
    task = _file_task(default_task, vtu)
    task["fields"] = HEADER
    task["mesh_edges"] = True
    ds = build_dataset(task)
    # tetra: 6 vertex pairs + 1 line = 7 undirected edges → 14 directed (mesh cells, derived)
    assert ds.graphs[0].edge_index.shape == (2, 14)


def _bad(tmp_path, capsys, argv_source, *needles):
    assert main(["data", "inspect", str(argv_source)]) == 2
    err = capsys.readouterr().err
    for needle in needles:
        assert needle in err, err
    assert "Traceback" not in err


@pytest.mark.parametrize("override,needles", [
    ({"velocity": np.full((8, 3), np.nan)}, ["velocity", "NaN/Inf"]),
    ({"velocity": np.zeros((8, 4))}, ["velocity", "trailing shape"]),
    ({"velocity": np.zeros((5, 3))}, ["velocity", "8 rows"]),
    ({"stress": np.arange(72.0).reshape(8, 3, 3)}, ["stress", "not symmetric"]),
    ({"velocity": None}, ["velocity", "missing"]),
    ({"pos": np.zeros((0, 3))}, ["empty data file", "pos"]),
])
def test_bad_npz_inputs_exit_2_naming_file_and_field(tmp_path, capsys, override, needles):
    path = _write(tmp_path / "bad.npz", **override)
    _bad(tmp_path, capsys, path, str(path), *needles)


def test_unreadable_and_edgeless_files(tmp_path, capsys):
    junk = tmp_path / "junk.npz"
    junk.write_bytes(b"not a zip archive")
    _bad(tmp_path, capsys, junk, str(junk), "unreadable")
    _bad(tmp_path, capsys, _write(tmp_path / "one.npz"), "only 1 samples", "task.source")
    folder = tmp_path / "set"
    folder.mkdir()
    for i in range(3):
        _write(folder / f"g{i}.npz", seed=i)
    far = _write(folder / "g1.npz", pos=np.arange(24.0).reshape(8, 3) * 100)
    _bad(tmp_path, capsys, folder, str(far), "no edges", "task.graph.radius")
