"""Random probe graphs for the gate, the cost model's timing and tests.

Graphs follow the data contract: ``pos`` centred, ``edge_index`` with row 0 = source j and
row 1 = destination i, ``edge_vec = pos[j] - pos[i]``, ``edge_len``, one tensor per field.
"""
from __future__ import annotations

import numpy as np
import torch
from e3nn import o3
from torch_geometric.data import Data

__all__ = ["random_graph", "graph_from", "radius_edges"]


def radius_edges(pos: torch.Tensor, radius: float) -> torch.Tensor:
    """All ordered pairs closer than ``radius`` (no self loops), sorted by destination.

    Computed with torch from ``pos`` itself, so a rotated cloud gives the same edges in the
    same order as long as no pair sits at the radius.

    Shapes:
        ``pos [N, 3]`` → ``edge_index [2, E]``.
    """
    d = torch.cdist(pos, pos)
    close = (d < radius) & ~torch.eye(pos.shape[0], dtype=torch.bool, device=pos.device)
    dst, src = close.nonzero().T
    return torch.stack([src, dst])


def graph_from(pos: torch.Tensor, features: dict[str, torch.Tensor], radius: float) -> Data:
    """A :class:`Data` with radius edges and ``features`` attached under their names."""
    edge_index = radius_edges(pos, radius)
    edge_vec = pos[edge_index[0]] - pos[edge_index[1]]
    return Data(pos=pos, edge_index=edge_index, edge_vec=edge_vec,
                edge_len=edge_vec.norm(dim=-1), **features)


def _radius(pos: np.ndarray, degree: float | None) -> float:
    d = np.sort(np.linalg.norm(pos[:, None] - pos[None], axis=-1)[np.triu_indices(len(pos), 1)])
    n = len(pos)
    if degree is not None:
        k = int(np.clip(round(n * degree / 2), 1, len(d) - 1))
        return float((d[k - 1] + d[k]) / 2)
    # Radius in the widest gap between pair distances giving a mean degree of 3..6, so
    # no pair sits near it (rotations in floating point cannot flip an edge).
    lo, hi = max(1, 3 * n // 2), min(len(d) - 1, 3 * n)
    k = lo + int(np.argmax(d[lo:hi + 1] - d[lo - 1:hi]))
    return float((d[k - 1] + d[k]) / 2)


def random_graph(fields: dict | None = None, n: int = 12, seed: int = 0, *,
                 radius: float | None = None, degree: float | None = None,
                 dtype: torch.dtype = torch.float32) -> Data:
    """A random non-degenerate point cloud with random features for ``fields``.

    Args:
        fields: field name → Field; each gets standard-normal values in its irreps basis
            (``[n, dim]`` for node fields, ``[1, dim]`` for graph fields).
        n: number of nodes.
        seed: seed of a private generator (the global RNG is untouched).
        radius: when given, the cloud is scaled so that its edge radius equals it.
        degree: aim at this mean degree; otherwise the radius sits in the widest gap of
            pair distances for a mean degree of 3..6.
        dtype: floating dtype of positions and features.

    Returns:
        A :class:`Data` with ``pos, edge_index, edge_vec, edge_len``, the fields,
        ``graph_radius`` (float), ``family`` ("probe") and ``sample`` (``seed``).

    Example:
        >>> random_graph(n=12, seed=0).pos.shape
        torch.Size([12, 3])
    """
    rng = np.random.default_rng(seed)
    pos = rng.uniform(-1.0, 1.0, (n, 3))
    pos -= pos.mean(0)
    r = _radius(pos, degree)
    if radius is not None:
        pos, r = pos * (radius / r), radius
    features = {}
    for f in (fields or {}).values():
        rows = 1 if f.level == "graph" else n
        features[f.name] = torch.as_tensor(rng.standard_normal((rows, o3.Irreps(f.irreps).dim)),
                                           dtype=dtype)
    data = graph_from(torch.as_tensor(pos, dtype=dtype), features, r)
    data.graph_radius, data.family, data.sample = r, "probe", seed
    return data
