"""Field kinds ↔ irreps: exact, norm-preserving conversion matching e3nn's bases."""
from __future__ import annotations

import numpy as np
import pytest
import torch
from e3nn import o3
from e3nn.io import CartesianTensor
from scipy.spatial.transform import Rotation

from searcher.data import FIELD_KINDS, irreps_dim, rotate_irreps, to_cartesian, to_irreps
from searcher.data._kinds import float64

RNG = np.random.default_rng(0)


def _random(kind, n=5):
    if kind in ("scalar", "pseudoscalar"):
        return RNG.normal(size=n)
    if kind in ("vector", "axial_vector"):
        return RNG.normal(size=(n, 3))
    a = RNG.normal(size=(n, 3, 3))
    if kind == "tensor":
        return a
    a = a + np.swapaxes(a, 1, 2)
    if kind == "traceless_symmetric_tensor":
        a -= np.trace(a, axis1=1, axis2=2)[:, None, None] * np.eye(3) / 3
    return a


@pytest.mark.parametrize("kind", list(FIELD_KINDS))
def test_round_trip_exact_and_norm_preserving(kind):
    a = _random(kind)
    c = to_irreps(kind, a)
    assert c.shape == (5, irreps_dim(kind)) == (5, o3.Irreps(FIELD_KINDS[kind]).dim)
    np.testing.assert_allclose(to_cartesian(kind, c), a, atol=1e-14)   # exact (float64)
    # Norm preserving: Σc² = A:A (REFERENCES.md, "Symmetric 3×3 tensor ... Norm preserving").
    np.testing.assert_allclose((c ** 2).sum(-1), (a.reshape(5, -1) ** 2).sum(-1), rtol=1e-13)


@pytest.mark.parametrize("formula,kind", [("ij=ji", "symmetric_tensor"), ("ij", "tensor")])
def test_tensor_components_match_e3nn_cartesian_tensor(formula, kind):
    # Reference: e3nn io.CartesianTensor (REFERENCES.md), evaluated in float64.
    a = _random(kind)
    with float64():
        ref = CartesianTensor(formula).from_cartesian(torch.as_tensor(a))
    np.testing.assert_allclose(to_irreps(kind, a), ref.numpy(), atol=1e-12)


def test_vector_basis_matches_e3nn():
    # e3nn 0.6: Irreps("1o").D_from_matrix(R) equals R, so the 1o basis is (x, y, z).
    r = Rotation.random(random_state=1).as_matrix()
    with float64():
        d = o3.Irreps("1o").D_from_matrix(torch.as_tensor(r)).numpy()
    np.testing.assert_allclose(d, r, atol=1e-12)


@pytest.mark.parametrize("kind", list(FIELD_KINDS))
@pytest.mark.parametrize("improper", [False, True])
def test_irreps_transform_matches_cartesian_transform(kind, improper):
    # Cartesian rules (common practice): scalar s, pseudoscalar det(R)s, vector Rv,
    # axial det(R)Rv, tensors R A Rᵀ; compared with e3nn Irreps.D_from_matrix (REFERENCES.md).
    r = Rotation.random(random_state=2).as_matrix() * (-1 if improper else 1)
    det = np.linalg.det(r)
    a = _random(kind)
    if kind == "scalar":
        moved = a
    elif kind == "pseudoscalar":
        moved = det * a
    elif kind == "vector":
        moved = a @ r.T
    elif kind == "axial_vector":
        moved = det * a @ r.T
    else:
        moved = np.einsum("ik,nkl,jl->nij", r, a, r)
    np.testing.assert_allclose(rotate_irreps(FIELD_KINDS[kind], to_irreps(kind, a), r),
                               to_irreps(kind, moved), atol=1e-12)


def test_2d_embedding_and_torch_passthrough():
    # 2D data live in the plane z = 0 (module docstring of searcher.data._kinds).
    np.testing.assert_array_equal(to_irreps("vector", [[1.0, 2.0]]), [[1.0, 2.0, 0.0]])
    m2 = np.array([[[1.0, 2.0], [2.0, -1.0]]])
    np.testing.assert_allclose(to_cartesian("symmetric_tensor", to_irreps("symmetric_tensor", m2)),
                               np.pad(m2, ((0, 0), (0, 1), (0, 1))), atol=1e-14)
    t = torch.ones(2, 3, dtype=torch.float32)
    out = to_irreps("vector", t)
    assert isinstance(out, torch.Tensor) and out.dtype == torch.float32


def test_traceless_kind_drops_the_trace():
    # Traceless part of I is zero (definition of the deviator, common practice).
    np.testing.assert_allclose(to_irreps("traceless_symmetric_tensor", np.eye(3)[None]), 0,
                               atol=1e-15)
