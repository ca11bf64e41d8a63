"""The tensor-basis network: Pope's integrity basis, its invariants, equivariance, errors.

Sources: Pope (1975), "A more general effective-viscosity hypothesis", J. Fluid Mech. 72,
331–340; Ling, Kurzawski & Templeton (2016), J. Fluid Mech. 807, 155–166 (eqs. 3.7, 3.8).
"""
from __future__ import annotations

import numpy as np
import pytest
import torch

from searcher.data import szl_anisotropy, to_irreps
from searcher.errors import UserError
from searcher.models import build_model
from searcher.models._tensor_basis import integrity_basis, invariants
from searcher.testing import assert_gate, make_fields, model_config, random_graph

FIELDS = make_fields()
TB = {"family": "tensor_basis", "node_inputs": ["scaled_strain", "scaled_vorticity"],
      "layers": 2, "width": 8}


def _shear():
    """Simple shear u = (y, 0, 0): S and Ω by hand (G_01 = 1)."""
    s = torch.tensor([[[0.0, 0.5, 0.0], [0.5, 0.0, 0.0], [0.0, 0.0, 0.0]]], dtype=torch.float64)
    w = torch.tensor([[[0.0, 0.5, 0.0], [-0.5, 0.0, 0.0], [0.0, 0.0, 0.0]]], dtype=torch.float64)
    return s, w


def _random_sw(n, seed, plane=False):
    g = torch.randn(n, 3, 3, dtype=torch.float64, generator=torch.Generator().manual_seed(seed))
    if plane:
        g[:, 2, :] = 0.0
        g[:, :, 2] = 0.0
    s = (g + g.transpose(1, 2)) / 2
    s = s - torch.eye(3, dtype=torch.float64) * (s.diagonal(dim1=1, dim2=2).sum(-1) / 3)[:, None, None]
    return s, (g - g.transpose(1, 2)) / 2


def test_simple_shear_terms_and_invariants_by_hand():
    s, w = _shear()
    t = integrity_basis(s, w)[0]
    # Hand-worked with a = 1/2: SΩ − ΩS = diag(−2a², 2a², 0); S² = diag(a², a², 0), tr = ½;
    # Ω² = diag(−a², −a², 0), tr = −½ (derived).
    assert torch.allclose(t[0], s[0])
    assert torch.allclose(t[1], torch.diag(torch.tensor([-0.5, 0.5, 0.0], dtype=torch.float64)))
    assert torch.allclose(t[2], torch.diag(torch.tensor([1 / 12, 1 / 12, -1 / 6], dtype=torch.float64)))
    assert torch.allclose(t[3], torch.diag(torch.tensor([-1 / 12, -1 / 12, 1 / 6], dtype=torch.float64)))
    # λ = (tr S², tr Ω², tr S³, tr Ω²S, tr Ω²S²) = (½, −½, 0, 0, −⅛) (derived).
    assert torch.allclose(invariants(s, w)[0],
                          torch.tensor([0.5, -0.5, 0.0, 0.0, -0.125], dtype=torch.float64))


def test_basis_is_symmetric_traceless_and_spans_five_in_3d_three_in_2d():
    s, w = _random_sw(6, 1)
    t = integrity_basis(s, w)
    assert torch.allclose(t, t.transpose(-1, -2), atol=1e-13)
    assert t.diagonal(dim1=-2, dim2=-1).sum(-1).abs().max() < 1e-12
    # Pope (1975): in a general 3D flow the ten tensors span all five traceless symmetric
    # directions; in a 2D mean flow only T1, T2, T3 are independent.
    assert all(np.linalg.matrix_rank(x.reshape(10, 9).numpy(), tol=1e-9) == 5 for x in t)
    s2, w2 = _random_sw(6, 2, plane=True)
    t2 = integrity_basis(s2, w2)
    assert all(np.linalg.matrix_rank(x.reshape(10, 9).numpy(), tol=1e-9) == 3 for x in t2)
    assert all(np.linalg.matrix_rank(x[:3].reshape(3, 9).numpy(), tol=1e-9) == 3 for x in t2)


def test_shih_zhu_lumley_closure_is_a_tensor_basis_expansion():
    # SZL (1993): b = −C_μ T1 + (3 T3 − 15 T2 − 19 T4) / (2 (1000 + s̄³)) with
    # C_μ = (2/3)/(1.25 + s̄ + 0.9 w̄); τ = 1 so Ŝ = S, Ω̂ = Ω.
    s, w = _random_sw(5, 3)
    grad = (s + w).numpy()
    b = szl_anisotropy(grad, np.ones(5))
    s_bar = np.sqrt(2 * np.einsum("nij,nij->n", s.numpy(), s.numpy()))
    w_bar = np.sqrt(2 * np.einsum("nij,nij->n", w.numpy(), w.numpy()))
    c_mu = (2 / 3) / (1.25 + s_bar + 0.9 * w_bar)
    d = 2 * (1000 + s_bar ** 3)
    g = np.zeros((5, 10))
    g[:, 0], g[:, 1], g[:, 2], g[:, 3] = -c_mu, -15 / d, 3 / d, -19 / d
    t = integrity_basis(s, w).numpy()
    assert np.allclose(np.einsum("nm,nmij->nij", g, t), b, atol=1e-12)


def test_fixed_coefficients_give_the_eddy_viscosity_closure():
    model = build_model(model_config(TB), FIELDS, "anisotropy").double()
    last = model.coefficients[-1]
    with torch.no_grad():
        last.weight.zero_()
        last.bias.zero_()
        last.bias[0] = -0.09          # g1 = −C_μ, C_μ = 0.09 (common practice)
    graph = random_graph(FIELDS, 10, 0, radius=0.6, dtype=torch.float64)
    from searcher.data import to_cartesian

    s = to_cartesian("traceless_symmetric_tensor", graph.scaled_strain)
    expected = to_irreps("traceless_symmetric_tensor", -0.09 * s)
    assert torch.allclose(model(graph), torch.as_tensor(expected), atol=1e-12)


def test_equivariant_to_1e9_in_float64():
    errors = assert_gate(model_config(TB), FIELDS, "anisotropy", seed=4)
    assert max(float(v) for v in errors.values()) < 1e-9


def test_inputs_and_target_are_checked():
    with pytest.raises(UserError) as err:
        build_model(model_config({**TB, "node_inputs": ["velocity", "scaled_vorticity"]}),
                    FIELDS, "anisotropy")
    assert "model.node_inputs" in str(err.value) and "axial_vector" in str(err.value)
    vec = make_fields({"strain": ("traceless_symmetric_tensor", "input", "node"),
                       "spin": ("axial_vector", "input", "node"),
                       "force": ("vector", "target", "node")})
    with pytest.raises(UserError) as err:
        build_model(model_config({**TB, "node_inputs": ["strain", "spin"]}), vec, "force")
    assert "model.family" in str(err.value) and "traceless_symmetric_tensor" in str(err.value)
