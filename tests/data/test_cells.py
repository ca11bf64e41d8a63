"""Cell-centred VTK fields: nodes at cell centroids, edges across shared faces."""
from __future__ import annotations

import json

import meshio
import numpy as np
import pytest
import yaml

from searcher.cli import main

FIELDS = {"velocity": {"kind": "vector", "role": "input", "at": "cells"},
          "stress": {"kind": "symmetric_tensor", "role": "target", "at": "cells"}}


def _hex_grid(path, nx=3, ny=2, nz=2, seed=0):
    """nx·ny·nz unit hexahedra (VTK vertex order) with cell_data velocity and stress."""
    grid = np.stack(np.meshgrid(np.arange(nx + 1), np.arange(ny + 1), np.arange(nz + 1),
                                indexing="ij"), -1).reshape(-1, 3).astype(float)
    index = lambda i, j, k: (i * (ny + 1) + j) * (nz + 1) + k   # noqa: E731
    cells = [[index(i, j, k), index(i + 1, j, k), index(i + 1, j + 1, k), index(i, j + 1, k),
              index(i, j, k + 1), index(i + 1, j, k + 1), index(i + 1, j + 1, k + 1),
              index(i, j + 1, k + 1)]
             for i in range(nx) for j in range(ny) for k in range(nz)]
    rng = np.random.default_rng(seed)
    c = len(cells)
    s = rng.normal(size=(c, 3, 3))
    mesh = meshio.Mesh(grid, [("hexahedron", np.array(cells))],
                       point_data={"velocity": rng.normal(size=(len(grid), 3))},
                       cell_data={"velocity": [rng.normal(size=(c, 3))],
                                  "stress": [(s + np.swapaxes(s, 1, 2)).reshape(c, 9)]})
    mesh.write(path)
    return path


def _study(tmp_path, source, fields, mesh_edges=True):
    doc = {"study": {"name": "cells"},
           "task": {"source": str(source), "fields": fields, "mesh_edges": mesh_edges,
                    "split": {"stress": [], "by": "sample"}},
           "model": {"node_inputs": ["velocity"]}}
    path = tmp_path / "cells.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return path


def test_hex_cells_give_one_node_per_cell_and_face_sharing_edges(tmp_path, capsys):
    folder = tmp_path / "vtu"
    folder.mkdir()
    for i in range(3):
        _hex_grid(folder / f"case{i}.vtu", seed=i)
    study = _study(tmp_path, folder, FIELDS)
    assert main(["data", "inspect", str(folder), "--study", str(study), "--json"]) == 0
    graphs = json.loads(capsys.readouterr().out)["stats"]["graphs"]
    assert graphs["nodes_min"] == graphs["nodes_max"] == 12        # 3·2·2 cells
    # Interior faces of a 3×2×2 block (derived): x 2·2·2 + y 3·1·2 + z 3·2·1 = 20, both ways.
    assert graphs["edges_min"] == graphs["edges_max"] == 40
    assert graphs["degree_max"] == 4                               # a middle cell: 1+1 +1 +1


def test_centroids_and_values_come_from_the_cells(tmp_path, default_task):
    from searcher.data import declared_fields, read_samples

    path = _hex_grid(tmp_path / "one.vtu", nx=2, ny=1, nz=1)
    task = json.loads(json.dumps(default_task))
    task.update(source=str(path), fields=FIELDS, mesh_edges=True)
    (sample,) = read_samples(task, declared_fields(task))
    np.testing.assert_allclose(sample.pos, [[0.5, 0.5, 0.5], [1.5, 0.5, 0.5]])
    assert sample.edge_index.tolist() == [[0, 1], [1, 0]]
    want = meshio.read(path).cell_data["velocity"][0]
    np.testing.assert_allclose(sample.fields["velocity"], want)   # a vector is 1o as is


def test_mixing_points_and_cells_is_a_located_error(tmp_path, capsys):
    folder = tmp_path / "vtu"
    folder.mkdir()
    for i in range(3):
        _hex_grid(folder / f"case{i}.vtu", seed=i)
    mixed = {"velocity": dict(FIELDS["velocity"], at="points"), "stress": FIELDS["stress"]}
    study = _study(tmp_path, folder, mixed)
    assert main(["data", "inspect", str(folder), "--study", str(study)]) == 2
    err = capsys.readouterr().err
    assert "task.fields.stress.at" in err and "cells.yaml" in err and "Traceback" not in err


@pytest.mark.parametrize("bad", ["cell", "faces"])
def test_unknown_place_lists_the_allowed_ones(tmp_path, capsys, bad):
    study = _study(tmp_path, tmp_path, {"velocity": dict(FIELDS["velocity"], at=bad),
                                        "stress": FIELDS["stress"]})
    assert main(["check", str(study)]) == 2
    err = capsys.readouterr().err
    assert "at" in err and "points" in err and "cells" in err
