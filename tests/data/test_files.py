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
        # derived: float64 written and read back; only the tensor change of basis rounds
        np.testing.assert_allclose(b.pos, a.pos, atol=1e-15)
        for name in a.fields:
            np.testing.assert_allclose(b.fields[name], a.fields[name], atol=1e-14)
    # The files themselves, opened with numpy rather than the project's reader: positions and
    # vectors as the generator made them (a vector's irreps components are its Cartesian ones
    # in e3nn 0.6), the header a JSON object naming every field.
    for a, file in zip(want, sorted(tmp_path.glob("*.npz")), strict=True):
        with np.load(file) as z:
            np.testing.assert_array_equal(z["pos"], a.pos)
            np.testing.assert_array_equal(z["velocity"], a.fields["velocity"])
            assert set(json.loads(str(z["header"]))) == set(a.fields)


def test_inspect_demo_and_path(tmp_path, capsys):
    assert main(["data", "inspect", "demo", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["stats"]["samples"] == 48  # task.demo.samples in searcher/spec/defaults.yaml
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


@pytest.mark.parametrize("suffix", [".vtk", ".vtu"])
def test_legacy_vtk_and_vtu_written_by_meshio(tmp_path, default_task, suffix):
    # Files written by meshio itself (not by searcher), read back through the VTK path.
    pts = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [0.0, 2.0, 0.0], [0.0, 0.0, 3.0]])
    velocity = np.array([[1.0, 2.0, 3.0], [4.0, 5.0, 6.0], [7.0, 8.0, 9.0], [-1.0, 0.5, 2.0]])
    pressure = np.array([0.5, -1.0, 2.0, 4.0])
    for i in range(3):
        meshio.write(tmp_path / f"m{i}{suffix}", meshio.Mesh(
            pts, [("line", np.array([[0, 1], [1, 2], [2, 3]]))],
            point_data={"velocity": velocity + i, "pressure": pressure}))
    task = _file_task(default_task, tmp_path)
    task["fields"] = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
                      "pressure": {"kind": "scalar", "role": "target", "level": "node"}}
    task["mesh_edges"] = True
    fields = describe_fields(task)
    samples = read_samples(task, fields)
    assert len(samples) == 3
    for i, s in enumerate(samples):
        # In e3nn 0.6 Irreps("1o").D_from_matrix(R) == R, so a vector's irreps components are
        # its Cartesian (x, y, z) unchanged (e3nn 0.6; pinned by test_vector_basis_matches_e3nn).
        np.testing.assert_array_equal(s.pos, pts)
        np.testing.assert_array_equal(s.fields["velocity"], velocity + i)
        np.testing.assert_array_equal(np.ravel(s.fields["pressure"]), pressure)
        # 3 line cells, both directions (derived: one undirected edge per 2-vertex cell)
        assert sorted(map(tuple, s.edge_index.T.tolist())) == \
            [(0, 1), (1, 0), (1, 2), (2, 1), (2, 3), (3, 2)]


def test_vtp_is_refused_by_name(tmp_path, capsys):
    # meshio 5.3 has no reader (or writer) for VTK PolyData .vtp: meshio.extension_to_filetypes
    # lists .vtk and .vtu only, so such a file is refused before it is opened.
    path = tmp_path / "surface.vtp"
    path.write_text('<VTKFile type="PolyData"/>')
    _bad(tmp_path, capsys, path, str(path), "unsupported data file type '.vtp'", ".npz, .vtu, .vtk")
