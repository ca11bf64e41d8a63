"""The anisotropy target: Pope-basis identities, SZL model, realizability, invariances."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from searcher.data import (FAMILIES, Placement, closure_anisotropy, demo_sample, draw_params,
                           linear_anisotropy, make_realizable, place_flow, pope_terms,
                           strain_rotation, szl_anisotropy, time_scale, to_cartesian)

RNG = np.random.default_rng(0)


def _gradients(n=8):
    g = RNG.normal(size=(n, 3, 3))
    return g - np.trace(g, axis1=1, axis2=2)[:, None, None] * np.eye(3) / 3   # incompressible


def test_pope_terms_symmetric_and_traceless():
    # Pope (1975): every integrity-basis tensor is symmetric and traceless.
    s, w = strain_rotation(_gradients())
    t = pope_terms(s, w)
    np.testing.assert_allclose(t, np.swapaxes(t, -1, -2), atol=1e-13)
    np.testing.assert_allclose(np.trace(t, axis1=-2, axis2=-1), 0, atol=1e-13)


def test_strain_rotation_convention():
    # G_ij = ∂u_i/∂x_j; S symmetric, Ω antisymmetric, S + Ω = G (definitions, derived).
    g = _gradients()
    s, w = strain_rotation(g)
    np.testing.assert_allclose(s + w, g, atol=1e-15)
    np.testing.assert_allclose(w, -np.swapaxes(w, 1, 2), atol=1e-15)


def test_linear_model_log_layer():
    # Log-layer equilibrium (REFERENCES.md, common practice): S k/ε = 1/√C_μ with C_μ = 0.09
    # gives b12 = −0.15 in simple shear u = (γ y, 0, 0).
    g = np.zeros((1, 3, 3))
    g[0, 0, 1] = 1.0
    s, _ = strain_rotation(g)
    b = linear_anisotropy(s / np.sqrt(0.09), 0.09)
    assert b[0, 0, 1] == pytest.approx(-0.15, abs=1e-12)


def test_time_scale_gives_equilibrium_shear_rate():
    # Simple shear has s = w = γ, so the rule τ = c_τ/(ω0 + s + w) gives s̄ = τ s =
    # c_τ γ/(2 + 2γ) (derived), tending to c_τ/2 in strong shear.
    for rate, expected in ((2.5, 3.33 * 2.5 / (2 + 5.0)), (1e9, 3.33 / 2)):
        g = np.zeros((1, 3, 3))
        g[0, 0, 1] = rate
        s, w = strain_rotation(g)
        assert time_scale(s, w)[0] * rate == pytest.approx(expected, rel=1e-8)


def test_szl_anisotropy_symmetric_traceless_realizable_and_scale_free():
    # b symmetric, traceless, eigenvalues in [−1/3, 2/3] (Schumann 1977); where the mean flow
    # dominates the background rate, the time-scale rule makes b independent of the flow's
    # speed scale (derived: degree 0 in G as ω0/(s + w) → 0), and b → 0 as G → 0.
    g = 4 * _gradients(64)
    b, _ = make_realizable(szl_anisotropy(g))
    np.testing.assert_allclose(b, np.swapaxes(b, 1, 2), atol=1e-14)
    np.testing.assert_allclose(np.trace(b, axis1=1, axis2=2), 0, atol=1e-13)
    eig = np.linalg.eigvalsh(b)
    assert eig.min() >= -1 / 3 - 1e-12 and eig.max() <= 2 / 3 + 1e-12
    np.testing.assert_allclose(szl_anisotropy(7e8 * g), szl_anisotropy(1e8 * g), atol=1e-7)
    assert np.abs(szl_anisotropy(1e-9 * g)).max() < 1e-8


def _shear(rate=1.0):
    g = np.zeros((1, 3, 3))
    g[0, 0, 1] = rate       # u = (γ y, 0, 0): G_12 = ∂u/∂y = γ
    return g


def test_szl_simple_shear_hand_worked():
    # Shih, Zhu & Lumley 1993 (NASA TM 105993; the same 3, 15, −19 over 1000 + s̄³ ship in
    # OpenFOAM's ShihQuadraticKE), worked by hand for u = (y, 0, 0) and k/ε = 1 (derived):
    # Ŝ = [[0, ½], [½, 0]], Ω̂ = [[0, ½], [−½, 0]], s̄ = w̄ = 1, C_μ = (2/3)/3.15;
    # dev Ŝ² = diag(1, 1, −2)/12, ŜΩ̂ − Ω̂Ŝ = diag(−½, ½, 0), dev Ω̂² = diag(−1, −1, 2)/12;
    # numerator 3 dev Ŝ² − 15 (ŜΩ̂ − Ω̂Ŝ) − 19 dev Ω̂² = diag(22/12 + 7.5, 22/12 − 7.5, −22/6),
    # divided by 2 (1000 + 1) = 2002.
    b = szl_anisotropy(_shear(), np.ones(1))[0]
    expected = np.zeros((3, 3))
    expected[0, 1] = expected[1, 0] = -0.5 * (2 / 3) / 3.15
    expected[0, 0], expected[1, 1] = (22 / 12 + 7.5) / 2002, (22 / 12 - 7.5) / 2002
    expected[2, 2] = -(22 / 6) / 2002
    np.testing.assert_allclose(b, expected, rtol=0, atol=1e-15)


def test_szl_shear_ordering_matches_homogeneous_shear():
    # Measured homogeneous shear orders the normal stresses b11 > b33 > b22 with b12 < 0
    # (Tavoularis & Corrsin 1981, J. Fluid Mech. 104; values from memory about 0.21, −0.07,
    # −0.14); the SZL quadratic terms reproduce that order, for any rate and time scale.
    for rate, tau in ((1.0, 1.0), (3.0, 1.11), (0.2, 5.0)):
        b = closure_anisotropy(_shear(rate), np.array([tau]))[0]
        assert b[0, 0] > b[2, 2] > b[1, 1] and b[0, 1] < 0, (rate, tau)


def _szl_by_components(g: np.ndarray, tau: float) -> np.ndarray:
    """Second, loop-level implementation of the published SZL formula (NASA TM 105993)."""
    s = [[tau * (g[i, j] + g[j, i]) / 2 for j in range(3)] for i in range(3)]
    w = [[tau * (g[i, j] - g[j, i]) / 2 for j in range(3)] for i in range(3)]
    mul = lambda a, c: [[sum(a[i][k] * c[k][j] for k in range(3)) for j in range(3)]  # noqa: E731
                        for i in range(3)]
    s2, w2, sw, ws = mul(s, s), mul(w, w), mul(s, w), mul(w, s)
    tr_s2, tr_w2 = sum(s2[i][i] for i in range(3)), sum(w2[i][i] for i in range(3))
    s_bar = np.sqrt(2 * sum(s[i][j] ** 2 for i in range(3) for j in range(3)))
    w_bar = np.sqrt(2 * sum(w[i][j] ** 2 for i in range(3) for j in range(3)))
    c_mu = (2 / 3) / (1.25 + s_bar + 0.9 * w_bar)
    out = np.zeros((3, 3))
    for i in range(3):
        for j in range(3):
            d = 1.0 if i == j else 0.0
            quad = (3 * (s2[i][j] - tr_s2 * d / 3) - 15 * (sw[i][j] - ws[i][j])
                    - 19 * (w2[i][j] - tr_w2 * d / 3))
            out[i, j] = -c_mu * s[i][j] + quad / (2 * (1000 + s_bar ** 3))
    return out


def test_szl_matches_the_published_formula_on_random_gradients():
    # The vectorised model against a component-by-component transcription of the formula
    # (Shih, Zhu & Lumley 1993), to 1e-12.
    g = 3 * _gradients(16)
    taus = RNG.uniform(0.1, 2.0, size=16)
    got = szl_anisotropy(g, taus)
    for n in range(16):
        np.testing.assert_allclose(got[n], _szl_by_components(g[n], taus[n]), rtol=0,
                                   atol=1e-12)


def test_closure_anisotropy_is_realizable_and_frame_covariant():
    # Schumann (1977): eigenvalues in [−1/3, 2/3]; symmetric and traceless; under G' = R G Rᵀ
    # (proper or improper R, scipy Rotation.random) b' = R b Rᵀ (REFERENCES.md).
    g = 40 * _gradients(32)
    taus = RNG.uniform(0.5, 3.0, size=32)
    b = closure_anisotropy(g, taus)
    eig = np.linalg.eigvalsh(b)
    assert eig.min() >= -1 / 3 - 1e-12 and eig.max() <= 2 / 3 + 1e-12
    np.testing.assert_allclose(b, np.swapaxes(b, 1, 2), atol=1e-14)
    np.testing.assert_allclose(np.trace(b, axis1=1, axis2=2), 0, atol=1e-13)
    for improper in (False, True):
        r = Rotation.random(random_state=5).as_matrix() @ np.diag([1, 1, -1 if improper else 1])
        moved = closure_anisotropy(np.einsum("ik,nkl,jl->nij", r, g, r), taus)
        np.testing.assert_allclose(moved, np.einsum("ik,nkl,jl->nij", r, b, r), atol=1e-12)


def test_make_realizable_scales_toward_isotropy():
    # An eigenvalue −0.5 < −1/3 is scaled by λ = (1/3)/0.5 (Lumley-triangle bound, Schumann 1977).
    b = np.diag([-0.5, 0.25, 0.25])[None]
    out, count = make_realizable(b)
    assert count == 1
    np.testing.assert_allclose(out[0], b[0] * (2 / 3), atol=1e-15)


@pytest.mark.parametrize("family", list(FAMILIES))
def test_rigid_placement_covariance(family):
    # u'(x) = R u(Rᵀ(x − c)) ⇒ ∇u' = R ∇u Rᵀ and b' = R b Rᵀ (REFERENCES.md), for proper and
    # improper R (scipy Rotation.random).
    params = draw_params(family, np.random.default_rng(2))
    body = np.random.default_rng(3).uniform(-1, 1, size=(10, 3)) + (family == "sphere") * 2.0
    for improper in (False, True):
        r = Rotation.random(random_state=4).as_matrix() @ np.diag([1, 1, -1 if improper else 1])
        c = np.array([0.3, -0.2, 0.1])
        u0, g0, p0, gp0 = place_flow(family, params, Placement(np.eye(3), np.zeros(3)), body)
        u1, g1, p1, gp1 = place_flow(family, params, Placement(r, c), body @ r.T + c)
        np.testing.assert_allclose(u1, u0 @ r.T, atol=1e-12)
        np.testing.assert_allclose(g1, np.einsum("ik,nkl,jl->nij", r, g0, r), atol=1e-11)
        np.testing.assert_allclose(p1, p0, atol=1e-12)
        np.testing.assert_allclose(gp1, gp0 @ r.T, atol=1e-11)
        b0 = szl_anisotropy(g0)
        np.testing.assert_allclose(szl_anisotropy(g1), np.einsum("ik,nkl,jl->nij", r, b0, r),
                                   atol=1e-12)


def test_galilean_invariance():
    # A uniform added velocity leaves S, Ω and hence b unchanged (REFERENCES.md); checked on
    # gradients taken by finite differences of the shifted field.
    params = draw_params("burgers", np.random.default_rng(1))
    place = Placement(np.eye(3), np.zeros(3))
    x = np.random.default_rng(2).uniform(-1, 1, size=(6, 3))
    drift = np.array([3.0, -1.0, 2.0])

    def grad_fd(shift):
        cols = []
        for j in range(3):
            e = np.zeros(3)
            e[j] = 1e-6
            cols.append(((place_flow("burgers", params, place, x + e)[0] + shift)
                         - (place_flow("burgers", params, place, x - e)[0] + shift)) / 2e-6)
        return np.stack(cols, -1)

    np.testing.assert_allclose(szl_anisotropy(grad_fd(drift)), szl_anisotropy(grad_fd(0.0)),
                               atol=1e-7)


def test_every_generated_sample_is_realizable(default_task):
    # Schumann (1977): eigenvalues of b in [−1/3, 2/3]; b symmetric and traceless by construction.
    demo = dict(default_task["demo"], probes=16)
    for i in range(int(demo["samples"])):
        b = to_cartesian("traceless_symmetric_tensor", demo_sample(demo, i).fields["anisotropy"])
        eig = np.linalg.eigvalsh(b)
        assert eig.min() >= -1 / 3 - 1e-12 and eig.max() <= 2 / 3 + 1e-12, i
        np.testing.assert_allclose(np.trace(b, axis1=1, axis2=2), 0, atol=1e-14)
