"""Field kinds, their irreps, and exact Cartesian ↔ irreps conversion.

A *field kind* names how a physical quantity transforms under O(3).  Each kind maps to an
e3nn irreps string; data enter the package as Cartesian arrays and are stored in the
irreps basis (e3nn order), where a rotation or reflection ``R`` acts as
``o3.Irreps(irreps).D_from_matrix(R)``.

Bases (e3nn 0.6, checked against ``D_from_matrix``):

* ``1o`` / ``1e``: in e3nn 0.6 ``Irreps("1o").D_from_matrix(R) == R``, so a vector's irreps
  components are its Cartesian ``(x, y, z)`` components unchanged (older e3nn releases used
  ``(y, z, x)``; the test ``test_vector_basis_matches_e3nn`` pins the current order).
* tensors: the change of basis of e3nn's ``io.CartesianTensor("ij=ji")`` (symmetric,
  ``0e+2e``) and ``CartesianTensor("ij")`` (general, ``0e+1e+2e``), computed once in
  float64.  Its rows are orthonormal under ``A:B``, so the conversion is norm preserving
  without rescaling: ``sum(c**2) == A:A``.  The traceless symmetric kind keeps the ``2e``
  rows of the symmetric basis (the trace row is dropped).

2D data (``z = 0`` plane) are embedded in 3D: 2-component vectors get ``z = 0`` and
2×2 tensors are padded with zeros.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass
from contextlib import contextmanager
from functools import cache

import numpy as np

# Kind name -> irreps string: the study language's table is the one source of truth.
from searcher.spec import FIELD_KINDS

__all__ = ["FIELD_KINDS", "Field", "cartesian_matrix", "to_irreps", "to_cartesian", "irreps_dim",
           "rotate_irreps", "float64"]

_TENSOR_KINDS = ("symmetric_tensor", "traceless_symmetric_tensor", "tensor")
# VTK writes symmetric tensors as 6 components in this order.
_VTK_SYM6 = ((0, 0), (1, 1), (2, 2), (0, 1), (1, 2), (0, 2))


@dataclass(frozen=True)
class Field:
    """One named field of a dataset.

    Args:
        name: array name in files and attribute name on each ``Data``.
        kind: a key of :data:`FIELD_KINDS`.
        irreps: the kind's e3nn irreps string.
        role: ``"input"``, ``"target"`` or ``"baseline"`` (a reference prediction of a target).
        level: ``"node"`` (one value per point) or ``"graph"`` (one value per graph).
        of: for a baseline, the name of the target it predicts; "" otherwise.
    """

    name: str
    kind: str
    irreps: str
    role: str
    level: str
    of: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


@contextmanager
def float64():
    """Run e3nn in float64: its basis and D matrices follow torch's default dtype, and in
    float32 they are only good to ~1e-7."""
    import torch

    old = torch.get_default_dtype()
    torch.set_default_dtype(torch.float64)
    try:
        yield
    finally:
        torch.set_default_dtype(old)


@cache
def _tensor_basis(kind: str) -> np.ndarray:
    """Rows = orthonormal 3×3 basis tensors (flattened) of a tensor kind, float64."""
    import torch
    from e3nn.io import CartesianTensor

    formula = "ij" if kind == "tensor" else "ij=ji"
    with float64():
        rtp = CartesianTensor(formula).reduced_tensor_products(torch.zeros(3, 3))
        q = rtp.change_of_basis.reshape(-1, 9).numpy().copy()
    return q[1:] if kind == "traceless_symmetric_tensor" else q


@cache
def irreps_dim(kind: str) -> int:
    """Number of irreps components of a kind (1, 3, 5, 6 or 9)."""
    from e3nn import o3

    return o3.Irreps(_irreps_of(kind)).dim


def _irreps_of(kind: str) -> str:
    if kind not in FIELD_KINDS:
        raise ValueError(f"unknown field kind {kind!r}; valid kinds: {', '.join(FIELD_KINDS)}")
    return FIELD_KINDS[kind]


def cartesian_matrix(kind: str, array: np.ndarray) -> np.ndarray:
    """Bring a tensor array to shape ``[..., 3, 3]``.

    Accepted trailing shapes: ``(3, 3)``, ``(9,)`` (row major), ``(2, 2)``, ``(4,)`` (2D,
    embedded), and ``(6,)`` in VTK order ``xx, yy, zz, xy, yz, xz`` for symmetric kinds.
    """
    a = np.asarray(array, dtype=np.float64)
    if a.shape[-2:] == (3, 3):
        return a
    if a.shape[-2:] == (2, 2):
        out = np.zeros(a.shape[:-2] + (3, 3))
        out[..., :2, :2] = a
        return out
    if a.shape[-1:] == (9,):
        return a.reshape(a.shape[:-1] + (3, 3))
    if a.shape[-1:] == (4,):
        return cartesian_matrix(kind, a.reshape(a.shape[:-1] + (2, 2)))
    if a.shape[-1:] == (6,) and kind != "tensor":
        out = np.zeros(a.shape[:-1] + (3, 3))
        for c, (i, j) in enumerate(_VTK_SYM6):
            out[..., i, j] = out[..., j, i] = a[..., c]
        return out
    raise ValueError(f"a {kind} needs trailing shape (3, 3), (9,), (2, 2), (4,)"
                     f"{' or (6,)' if kind != 'tensor' else ''}; got {a.shape}")


def to_irreps(kind: str, cartesian):
    """Cartesian values → irreps-basis components (exact, norm preserving).

    Args:
        kind: a field kind.
        cartesian: scalars ``[...]`` or ``[..., 1]``; vectors ``[..., 3]`` or ``[..., 2]``;
            tensors as accepted by :func:`cartesian_matrix`.  A torch tensor gives a torch
            tensor of the same dtype back, anything else a float64 numpy array.

    Shapes:
        returns ``[..., irreps_dim(kind)]``.

    Example:
        >>> to_irreps("vector", [1.0, 2.0]).tolist()
        [1.0, 2.0, 0.0]
    """
    like = cartesian
    a = np.asarray(cartesian.detach().cpu().numpy() if hasattr(cartesian, "detach") else cartesian,
                   dtype=np.float64)
    irreps = _irreps_of(kind)
    if irreps in ("0e", "0o"):
        out = a if a.shape[-1:] == (1,) else a[..., None]
    elif irreps in ("1o", "1e"):
        if a.shape[-1:] == (2,):
            a = np.concatenate([a, np.zeros(a.shape[:-1] + (1,))], axis=-1)
        if a.shape[-1:] != (3,):
            raise ValueError(f"a {kind} needs trailing shape (3,) or (2,); got {a.shape}")
        out = a
    else:
        m = cartesian_matrix(kind, a)
        out = m.reshape(m.shape[:-2] + (9,)) @ _tensor_basis(kind).T
    return _like(like, out)


def to_cartesian(kind: str, irreps_array):
    """Irreps-basis components → Cartesian values; inverse of :func:`to_irreps`.

    Shapes:
        ``[..., irreps_dim(kind)]`` → scalars ``[...]``, vectors ``[..., 3]``,
        tensors ``[..., 3, 3]``.
    """
    like = irreps_array
    c = np.asarray(irreps_array.detach().cpu().numpy() if hasattr(irreps_array, "detach")
                   else irreps_array, dtype=np.float64)
    dim = irreps_dim(kind)
    if c.shape[-1:] != (dim,):
        raise ValueError(f"a {kind} in the irreps basis has {dim} components; got shape {c.shape}")
    if kind in _TENSOR_KINDS:
        out = (c @ _tensor_basis(kind)).reshape(c.shape[:-1] + (3, 3))
    elif dim == 1:
        out = c[..., 0]
    else:
        out = c
    return _like(like, out)


def rotate_irreps(irreps: str, values: np.ndarray, rotation: np.ndarray) -> np.ndarray:
    """Apply ``D(R)`` of an irreps string to components ``[..., dim]`` (R may be improper)."""
    import torch
    from e3nn import o3

    with float64():
        d = o3.Irreps(irreps).D_from_matrix(torch.as_tensor(rotation, dtype=torch.float64)).numpy()
    return np.asarray(values, dtype=np.float64) @ d.T


def _like(like, out: np.ndarray):
    if hasattr(like, "detach"):
        import torch

        return torch.as_tensor(np.ascontiguousarray(out), dtype=like.dtype)
    return np.ascontiguousarray(out)
