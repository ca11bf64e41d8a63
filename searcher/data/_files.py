"""Reading and writing field data files.

NPZ schema (one graph per file; ``searcher data export`` writes it, the reader accepts it):

* ``pos`` — float ``[N, 3]`` probe positions (``[N, 2]`` = 2D data in the plane z = 0);
* one array per field, in Cartesian form, named by the field: scalar / pseudoscalar
  ``[N]`` or ``[N, 1]``; vector / axial_vector ``[N, 3]`` or ``[N, 2]``; tensors
  ``[N, 3, 3]``, ``[N, 9]`` (row major), ``[N, 2, 2]``, ``[N, 4]``, or for symmetric kinds
  ``[N, 6]`` in VTK order xx, yy, zz, xy, yz, xz.  Graph-level fields have one row ``[1, …]``;
* ``edge_index`` — optional int ``[2, E]``, row 0 = source j, row 1 = destination i
  (used when ``task.mesh_edges`` is true);
* ``header`` — a JSON string: field name → ``{"kind", "role", "level"}``.  A study's
  ``task.fields`` takes precedence; without one the header declares the fields.

VTK (``.vtu``, ``.vtk``, read with meshio; meshio 5.3 has no ``.vtp`` reader, so PolyData
files are refused by name): ``point_data`` arrays are node fields,
``field_data`` arrays graph fields; ``task.fields`` must declare their kinds; with
``task.mesh_edges`` the edges join every pair of vertices that share a cell.  When the
fields are declared ``at: cells`` (finite-volume output), the nodes are the cell centroids,
the node fields come from ``cell_data`` (blocks concatenated in file order), and with
``task.mesh_edges`` two cells are joined when they share a face (see ``_cells``).

A folder is one dataset: its data files in name order, one graph each; a file directly in
it is a case of its own, and each sub-folder is one case holding its files (``_cases``).  Tensors of a
symmetric kind must be symmetric to a relative tolerance of 1e-6; the traceless kind keeps
only the traceless part.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from searcher.data._demo import Sample
from searcher.data._graphs import RESERVED_NAMES
from searcher.data._kinds import FIELD_KINDS, Field, cartesian_matrix, to_cartesian, to_irreps
from searcher.errors import UserError, ensure_folder
from searcher.spec import FIELD_ROLES

__all__ = ["SUFFIXES", "data_cases", "data_files", "declared_fields", "read_samples", "write_npz"]

SUFFIXES = (".npz", ".vtu", ".vtk")  # meshio 5.3 reads no .vtp (VTK PolyData XML)
_SYM_TOL = 1e-6


def data_files(source) -> list[Path]:
    """The data files of a file or folder source (see :func:`data_cases` for the order)."""
    return [p for p, _ in data_cases(source)]


def data_cases(source) -> list[tuple[Path, str]]:
    """``(file, case)`` of every data file of a source: a file is its own case (its stem);
    a folder's files directly in it likewise, and each sub-folder is one case."""
    path = Path(source)
    if path.is_dir():
        from searcher.data._cases import case_files

        files = case_files(path, SUFFIXES)
        if not files:
            raise UserError.single(f"folder holds no data files (rule: at least one of "
                                   f"{', '.join(SUFFIXES)})", file=str(path), path="task.source")
        return files
    if not path.exists():
        raise UserError.single("data source does not exist", file=str(path), path="task.source")
    if path.suffix.lower() not in SUFFIXES:
        raise UserError.single(f"unsupported data file type {path.suffix!r} (rule: one of "
                               f"{', '.join(SUFFIXES)})", file=str(path), path="task.source")
    return [(path, path.stem)]


def _err(path, message, key=""):
    return UserError.single(message, file=str(path), path=key)


def field_place(task_cfg: dict) -> str:
    """``points`` or ``cells``: where the declared node fields live (``task.fields[].at``).

    Raises:
        UserError: two fields name different places (located at the second one's key).
    """
    decl = task_cfg.get("fields") or {}
    places = [(n, (e.get("at") if isinstance(e, dict) else None) or "points")
              for n, e in decl.items()]
    for name, at in places:
        if at not in ("points", "cells"):
            raise _err("", f"must be points or cells; got {at!r}", f"task.fields.{name}.at")
        if at != places[0][1]:
            raise _err("", f"field {name!r} is at {at!r} but {places[0][0]!r} is at "
                       f"{places[0][1]!r} (rule: every field lives at the same place)",
                       f"task.fields.{name}.at")
    return places[0][1] if places else "points"


def _load(path: Path, place: str = "points") -> dict:
    """Raw arrays: ``pos``, ``arrays`` (node), ``graph_arrays``, ``edges``, ``header``."""
    try:
        if path.suffix.lower() == ".npz":
            with np.load(path, allow_pickle=False) as z:
                arrays = {k: z[k] for k in z.files}
            header = json.loads(str(arrays.pop("header"))) if "header" in arrays else {}
            if not isinstance(header, dict):
                raise ValueError("header is not a JSON object")
            return {"pos": arrays.pop("pos", None), "edges": arrays.pop("edge_index", None),
                    "arrays": arrays, "graph_arrays": arrays, "header": header, "undirected": False}
        import meshio

        mesh = meshio.read(path)
    except UserError:
        raise
    except Exception as exc:   # any reader failure means the file is unreadable for us
        raise _err(path, f"unreadable data file ({type(exc).__name__}: {exc})") from None
    if place == "cells":
        from searcher.data._cells import cell_graph

        pos, pairs, arrays = cell_graph(mesh, path)
        return {"pos": pos, "edges": pairs, "arrays": arrays,
                "graph_arrays": {k: np.asarray(v) for k, v in mesh.field_data.items()},
                "header": {}, "undirected": True}
    edges = []
    for block in mesh.cells:
        cells = np.asarray(block.data)
        for a in range(cells.shape[1]):
            for b in range(a + 1, cells.shape[1]):
                edges.append(cells[:, [a, b]])
    pairs = np.concatenate(edges) if edges else np.zeros((0, 2), dtype=np.int64)
    return {"pos": mesh.points, "edges": pairs.T, "arrays": dict(mesh.point_data),
            "graph_arrays": {k: np.asarray(v) for k, v in mesh.field_data.items()}, "header": {},
            "undirected": True}


def declared_fields(task_cfg: dict) -> dict[str, Field]:
    """Fields of a file source: ``task.fields`` or, when empty, the first NPZ header."""
    decl = dict(task_cfg.get("fields") or {})
    origin, where = "task.fields", ""
    if not decl:
        first = data_files(task_cfg["source"])[0]
        where = str(first)
        decl = _load(first)["header"] if first.suffix.lower() == ".npz" else {}
        origin = "header"
        if not decl:
            raise _err(first, "no field declarations (rule: task.fields must declare each "
                       "field's kind, role and level, or an NPZ file must carry a header)",
                       "task.fields")
    if origin == "task.fields":
        field_place(task_cfg)
    fields = {}
    for name, spec in decl.items():
        key = f"{origin}.{name}"
        spec = spec if isinstance(spec, dict) else {}
        kind, role, level = spec.get("kind"), spec.get("role", "input"), spec.get("level", "node")
        if not str(name).isidentifier() or name in RESERVED_NAMES:
            raise _err(where, f"field name must be an identifier not in {sorted(RESERVED_NAMES)};"
                       f" got {name!r}", key)
        if kind not in FIELD_KINDS:
            raise _err(where, f"kind must be one of {', '.join(FIELD_KINDS)}; got {kind!r}", key)
        if role not in FIELD_ROLES or level not in ("node", "graph"):
            raise _err(where, f"role must be {'|'.join(FIELD_ROLES)} and level node|graph; got "
                       f"role={role!r}, level={level!r}", key)
        if spec.get("at", "points") not in ("points", "cells"):
            raise _err(where, f"at must be points or cells; got {spec.get('at')!r}", key)
        fields[name] = Field(name, kind, FIELD_KINDS[kind], role, level,
                             str(spec.get("of", "")) if role == "baseline" else "")
    targets = [f.name for f in fields.values() if f.role == "target"]
    if len(targets) != 1:
        raise _err(where, f"exactly one field must have role target; got {targets}", origin)
    for f in fields.values():
        aim = fields[targets[0]]
        if f.role == "baseline" and (f.of != aim.name or (f.kind, f.level) != (aim.kind, aim.level)):
            raise _err(where, f"a baseline field needs of: {aim.name} and its kind {aim.kind} "
                       f"and level {aim.level}; got of={f.of!r}, kind={f.kind!r}, "
                       f"level={f.level!r}", f"{origin}.{f.name}")
    return fields


def _field_values(path, f: Field, raw, n: int) -> np.ndarray:
    key = f"task.fields.{f.name}"
    pool = raw["arrays"] if f.level == "node" else raw["graph_arrays"]
    if f.name not in pool:
        raise _err(path, f"declared field {f.name!r} is missing (arrays present: "
                   f"{sorted(pool)})", key)
    try:
        arr = np.asarray(pool[f.name], dtype=np.float64)
    except (TypeError, ValueError):
        raise _err(path, f"field {f.name!r} is not numeric (dtype {pool[f.name].dtype})",
                   key) from None
    if f.level == "graph" and (arr.ndim == 0 or arr.shape[0] != 1):
        arr = arr[None]
    rows = n if f.level == "node" else 1
    if arr.ndim == 0 or arr.shape[0] != rows:
        raise _err(path, f"field {f.name!r} must have {rows} rows ({f.level} level); got shape "
                   f"{arr.shape}", key)
    bad = int((~np.isfinite(arr)).sum())
    if bad:
        raise _err(path, f"field {f.name!r} holds {bad} NaN/Inf values (rule: all finite)", key)
    try:
        if f.kind in ("symmetric_tensor", "traceless_symmetric_tensor"):
            m = cartesian_matrix(f.kind, arr)
            asym = float(np.abs(m - np.swapaxes(m, -1, -2)).max())
            if asym > _SYM_TOL * max(1.0, float(np.abs(m).max())):
                raise _err(path, f"field {f.name!r} is declared {f.kind} but is not symmetric "
                           f"(max |A − Aᵀ| = {asym:.3g}, tolerance {_SYM_TOL:g} relative)", key)
        return to_irreps(f.kind, arr)
    except ValueError as exc:
        raise _err(path, f"field {f.name!r}: {exc}", key) from None


def _edges(path, raw, n: int) -> np.ndarray:
    e = raw["edges"]
    if e is None:
        raise _err(path, "task.mesh_edges is true but the file has no edge_index array",
                   "task.mesh_edges")
    e = np.asarray(e)
    if e.ndim != 2 or e.shape[0] != 2 or not np.issubdtype(e.dtype, np.integer):
        raise _err(path, f"edge_index must be an integer array [2, E]; got {e.dtype} {e.shape}",
                   "edge_index")
    if e.size and (e.min() < 0 or e.max() >= n):
        raise _err(path, f"edge_index refers to nodes outside 0..{n - 1}", "edge_index")
    if raw["undirected"]:
        e = np.concatenate([e, e[::-1]], axis=1)   # mesh cells give undirected pairs
    e = e[:, e[0] != e[1]]
    return np.unique(e.T, axis=0).T.astype(np.int64).reshape(2, -1)


def read_samples(task_cfg: dict, fields: dict[str, Field]) -> list[Sample]:
    """One :class:`Sample` per data file, fields converted to the irreps basis."""
    samples = []
    place = field_place(task_cfg)
    for index, (path, case) in enumerate(data_cases(task_cfg["source"])):
        if place == "cells" and path.suffix.lower() == ".npz":
            raise _err(path, "fields at cells need a VTK file with cell_data (an NPZ file "
                       "holds node values only)", "task.fields")
        raw = _load(path, place)
        pos = raw["pos"]
        if pos is None or np.asarray(pos).size == 0:
            raise _err(path, "empty data file (rule: a non-empty 'pos' array [N, 3] or [N, 2])",
                       "pos")
        pos = np.asarray(pos, dtype=np.float64)
        if pos.ndim != 2 or pos.shape[1] not in (2, 3):
            raise _err(path, f"pos must have shape [N, 3] or [N, 2]; got {pos.shape}", "pos")
        if not np.isfinite(pos).all():
            raise _err(path, "pos holds NaN/Inf values (rule: all finite)", "pos")
        pos = to_irreps("vector", pos)   # embeds 2D points in the plane z = 0
        values = {f.name: _field_values(path, f, raw, len(pos)) for f in fields.values()}
        edges = _edges(path, raw, len(pos)) if task_cfg.get("mesh_edges") else None
        samples.append(Sample(pos, values, case, index, source=str(path), edge_index=edges))
    return samples


def write_npz(out_dir, samples: list[Sample], fields: dict[str, Field]) -> list[Path]:
    """Write samples as NPZ files of the schema above (Cartesian values, world positions).

    Args:
        out_dir: the folder (created).
        samples: what to write.
        fields: the fields' kinds, roles and levels (the header).

    Raises:
        UserError: ``out_dir`` cannot be made or written.
    """
    out = ensure_folder(out_dir, "out_dir")
    header = json.dumps({f.name: {"kind": f.kind, "role": f.role, "level": f.level,
                                  **({"of": f.of} if f.of else {})}
                         for f in fields.values()})
    paths = []
    for s in samples:
        path = out / f"graph_{s.sample:04d}.npz"
        arrays = {name: to_cartesian(fields[name].kind, v) for name, v in s.fields.items()}
        np.savez(path, pos=s.pos, header=np.array(header), **arrays)
        paths.append(path)
    return paths
