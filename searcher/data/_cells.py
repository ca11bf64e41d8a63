"""Cell-centred graphs from a meshio mesh: nodes at cell centroids, edges across shared faces.

Finite-volume solvers store their fields at cell centres (VTK ``cell_data``).  Each cell
becomes a node at the mean of its vertices; two cells are neighbours when they share a face
(3D cells) or an edge (2D cells), the connectivity a finite-volume flux uses.  Faces are
compared as sorted vertex tuples, so cells of different types (hexahedra beside wedges)
still meet across a shared quadrilateral or triangle.
"""
from __future__ import annotations

import numpy as np

from searcher.errors import UserError

__all__ = ["FACES", "cell_graph"]

# Local vertex numbers of each face, in VTK's vertex order per cell type.
FACES: dict[str, list[tuple[int, ...]]] = {
    "hexahedron": [(0, 1, 2, 3), (4, 5, 6, 7), (0, 1, 5, 4), (1, 2, 6, 5), (2, 3, 7, 6),
                   (3, 0, 4, 7)],
    "tetra": [(0, 1, 2), (0, 1, 3), (1, 2, 3), (0, 2, 3)],
    "wedge": [(0, 1, 2), (3, 4, 5), (0, 1, 4, 3), (1, 2, 5, 4), (2, 0, 3, 5)],
    "pyramid": [(0, 1, 2, 3), (0, 1, 4), (1, 2, 4), (2, 3, 4), (3, 0, 4)],
    "triangle": [(0, 1), (1, 2), (2, 0)],
    "quad": [(0, 1), (1, 2), (2, 3), (3, 0)],
    "line": [(0,), (1,)],
}


def cell_graph(mesh, path) -> tuple[np.ndarray, np.ndarray, dict[str, np.ndarray]]:
    """Centroids ``[C, 3]``, face-sharing cell pairs ``[2, P]`` and cell arrays ``name → [C, …]``.

    Args:
        mesh: a ``meshio.Mesh``.
        path: its file, for error messages.

    Example:
        Two unit hexahedra side by side give 2 nodes at x = 0.5 and 1.5 and one pair [[0], [1]].
    """
    known = [b for b in mesh.cells if b.type in FACES]
    skipped = sorted({b.type for b in mesh.cells} - set(FACES))
    if not known:
        raise UserError.single(f"fields at cells, but the file has no cells of a known type "
                               f"(known: {', '.join(FACES)}; found: {', '.join(skipped) or 'none'})",
                               file=str(path), path="task.fields")
    points = np.asarray(mesh.points, dtype=np.float64)
    centroids, faces, owners, start = [], [], [], 0
    for block in known:
        cells = np.asarray(block.data, dtype=np.int64)
        centroids.append(points[cells].mean(axis=1))
        for local in FACES[block.type]:
            face = np.full((len(cells), 4), -1, dtype=np.int64)
            face[:, :len(local)] = np.sort(cells[:, list(local)], axis=1)
            faces.append(face)
            owners.append(start + np.arange(len(cells)))
        start += len(cells)
    pairs = _shared(np.concatenate(faces), np.concatenate(owners))
    arrays = {}
    kept = [i for i, b in enumerate(mesh.cells) if b.type in FACES]
    for name, blocks in mesh.cell_data.items():
        if len(blocks) == len(mesh.cells):
            arrays[name] = np.concatenate([np.asarray(blocks[i]) for i in kept])
    return np.concatenate(centroids), pairs, arrays


def _shared(faces: np.ndarray, owners: np.ndarray) -> np.ndarray:
    """Pairs of owners of identical faces (a face shared by two cells gives one pair)."""
    if len(faces) == 0:
        return np.zeros((2, 0), dtype=np.int64)
    order = np.lexsort(faces.T[::-1])
    faces, owners = faces[order], owners[order]
    same = np.all(faces[1:] == faces[:-1], axis=1)
    a, b = owners[:-1][same], owners[1:][same]
    keep = a != b
    return np.stack([a[keep], b[keep]]).astype(np.int64)
