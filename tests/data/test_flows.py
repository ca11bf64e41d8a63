"""Analytic flow families checked against their textbook properties (REFERENCES.md)."""
from __future__ import annotations

import numpy as np
import pytest

from searcher.data import FAMILIES, draw_params, evaluate_flow

H = 1e-6


def _points(family, params, n=12, seed=0):
    x = np.random.default_rng(seed).uniform(-1, 1, size=(n, 3))
    if family == "sphere":   # keep clear of the body and the finite-difference stencil
        x = x / np.linalg.norm(x, axis=1, keepdims=True) * (params["radius"] * params["L"] * 1.5
                                                             + np.abs(x[:, :1]))
    return x


def _fd_gradient(fn, x):
    """Central differences: column j = ∂f/∂x_j."""
    cols = []
    for j in range(3):
        e = np.zeros(3)
        e[j] = H
        cols.append((fn(x + e) - fn(x - e)) / (2 * H))
    return np.stack(cols, axis=-1)


@pytest.mark.parametrize("family", list(FAMILIES))
def test_divergence_free_and_gradients_by_finite_differences(family):
    params = draw_params(family, np.random.default_rng(5))
    x = _points(family, params)
    u, g, p, gp = evaluate_flow(family, params, x)
    g_fd = _fd_gradient(lambda y: evaluate_flow(family, params, y)[0], x)
    # Every demo field is divergence-free (REFERENCES.md: "check numerically by finite
    # differences").
    np.testing.assert_allclose(np.trace(g_fd, axis1=1, axis2=2), 0, atol=1e-6)
    # Analytic G_ij = ∂u_i/∂x_j and ∇p agree with central differences (derived).
    np.testing.assert_allclose(g, g_fd, atol=1e-6)
    gp_fd = _fd_gradient(lambda y: evaluate_flow(family, params, y)[2][:, None], x)[:, 0]
    np.testing.assert_allclose(gp, gp_fd, atol=1e-5)


@pytest.mark.parametrize("family", list(FAMILIES))
def test_pressure_balances_steady_euler_where_steady(family):
    # Steady Euler: ∇p = −(u·∇)u (ρ = 1).  abc, strain and sphere are steady Euler flows
    # (Dombre et al. 1986; Batchelor 1967 §6.8); lamb_oseen and burgers satisfy the radial
    # balance ∂p/∂r = v_θ²/r − v_r ∂v_r/∂r (REFERENCES.md), which is the radial part of it.
    # Taylor–Green's pressure is the initial Poisson solution: ∇²p = −∂_i u_j ∂_j u_i.
    params = draw_params(family, np.random.default_rng(6))
    x = _points(family, params, seed=1)
    u, g, p, gp = evaluate_flow(family, params, x)
    accel = np.einsum("nij,nj->ni", g, u)
    if family in ("abc", "strain", "sphere"):
        np.testing.assert_allclose(gp, -accel, atol=1e-10)
    elif family in ("lamb_oseen", "burgers"):
        rad = x[:, :2] / np.linalg.norm(x[:, :2], axis=1, keepdims=True)
        np.testing.assert_allclose((gp[:, :2] * rad).sum(1), -(accel[:, :2] * rad).sum(1),
                                   atol=1e-9)
    else:
        lap = np.trace(_fd_gradient(lambda y: evaluate_flow(family, params, y)[3], x),
                       axis1=1, axis2=2)
        np.testing.assert_allclose(lap, -np.einsum("nij,nji->n", g, g), atol=1e-5)


def test_abc_curl_equals_velocity():
    # ABC flow is Beltrami: curl u = u for unit wavenumber (Dombre et al. 1986).
    params = {"A": 1.0, "B": 0.7, "C": 0.4}
    x = np.random.default_rng(1).uniform(-3, 3, size=(10, 3))
    u, g, _, _ = evaluate_flow("abc", params, x)
    curl = np.stack([g[:, 2, 1] - g[:, 1, 2], g[:, 0, 2] - g[:, 2, 0], g[:, 1, 0] - g[:, 0, 1]], 1)
    np.testing.assert_allclose(curl, u, atol=1e-12)


def test_taylor_green_mean_kinetic_energy():
    # Volume-mean kinetic energy V0²/8 over the periodic box (REFERENCES.md, derived);
    # a uniform 16³ grid integrates these trigonometric products exactly.
    v0 = 1.7
    grid = np.arange(16) * 2 * np.pi / 16
    x = np.stack(np.meshgrid(grid, grid, grid, indexing="ij"), -1).reshape(-1, 3)
    u, _, _, _ = evaluate_flow("taylor_green", {"U": v0}, x)
    assert 0.5 * (u ** 2).sum(1).mean() == pytest.approx(v0 ** 2 / 8, rel=1e-12)


def test_sphere_surface_pressure_and_no_penetration():
    # Batchelor 1967 §6.8: C_p = 1 − (9/4) sin²θ and u·n = 0 on r = a.
    a, speed = 0.3, 1.4
    theta = np.linspace(0.1, 3.0, 9)
    phi = np.linspace(0, 2 * np.pi, 9)
    n = np.stack([np.cos(theta), np.sin(theta) * np.cos(phi), np.sin(theta) * np.sin(phi)], 1)
    u, _, p, _ = evaluate_flow("sphere", {"radius": a, "U": speed}, a * n)
    np.testing.assert_allclose((u * n).sum(1), 0, atol=1e-12)
    np.testing.assert_allclose(p / (0.5 * speed ** 2), 1 - 9 / 4 * np.sin(theta) ** 2, atol=1e-12)


def test_lamb_oseen_far_field_is_a_point_vortex():
    # Far from the core v_θ → Γ/(2πr) and p → −Γ²/(8π²r²) (point vortex, derived from
    # ∂p/∂r = v_θ²/r, REFERENCES.md).
    gamma, core, r = 2.0, 0.01, 3.0
    u, _, p, _ = evaluate_flow("lamb_oseen", {"circulation": gamma, "core": core},
                               np.array([[r, 0.0, 0.0]]))
    assert u[0, 1] == pytest.approx(gamma / (2 * np.pi * r), rel=1e-9)
    assert p[0] == pytest.approx(-gamma ** 2 / (8 * np.pi ** 2 * r ** 2), rel=1e-3)


@pytest.mark.parametrize("index", range(12))
def test_demo_vorticity_is_the_curl_and_an_axial_vector(index):
    # Dombre et al. 1986 (J. Fluid Mech. 167): the ABC flow is Beltrami, curl u = u at unit
    # wavenumber; scaled to length L it is curl u = u / L. Under a placement
    # u'(x) = R u(R^T x) the curl becomes det(R) R curl u (an axial vector), so the probed
    # vorticity equals +-u'/L by the sign of det(R).
    from searcher.data import demo_sample, to_cartesian
    from searcher.data._demo import _placement
    from searcher.spec import defaults

    demo = defaults()["task"]["demo"] | {"probes": 10, "families": ["abc", "burgers"]}
    s = demo_sample(demo, index)
    u = to_cartesian("vector", s.fields["velocity"])
    w = to_cartesian("axial_vector", s.fields["vorticity"])
    if s.family == "abc":
        place = _placement(np.random.default_rng([demo["seed"], index, 1]), demo["region"],
                           demo["reflect"])
        sign = np.sign(np.linalg.det(place.rotation))
        np.testing.assert_allclose(w, sign * u / s.info["params"]["L"], atol=1e-10)
    s_rate = to_cartesian("traceless_symmetric_tensor", s.fields["strain_rate"])
    np.testing.assert_allclose(s_rate, np.swapaxes(s_rate, 1, 2), atol=1e-12)
    np.testing.assert_allclose(np.trace(s_rate, axis1=1, axis2=2), 0.0, atol=1e-10)


def test_scaled_inputs_are_the_gradients_times_the_time_scale():
    # Closure inputs non-dimensionalised by the turbulence time scale, Ŝ = (k/ε) S and
    # ω̂ = (k/ε) ω (Pope 1975; Ling, Kurzawski & Templeton 2016); the demo's rule
    # k/ε = 3.33/(2 + s + w) with s = √(2 S:S), w = |ω| (derived: 2 Ω:Ω = |ω|²).
    from searcher.data import demo_sample, to_cartesian
    from searcher.spec import defaults

    demo = defaults()["task"]["demo"] | {"probes": 10}
    for index in range(6):
        f = demo_sample(demo, index).fields
        s_rate = to_cartesian("traceless_symmetric_tensor", f["strain_rate"])
        w = to_cartesian("axial_vector", f["vorticity"])
        tau = 3.33 / (2 + np.sqrt(2 * (s_rate ** 2).sum((1, 2))) + np.linalg.norm(w, axis=1))
        np.testing.assert_allclose(to_cartesian("traceless_symmetric_tensor",
                                                f["scaled_strain"]),
                                   tau[:, None, None] * s_rate, atol=1e-12)
        np.testing.assert_allclose(to_cartesian("axial_vector", f["scaled_vorticity"]),
                                   tau[:, None] * w, atol=1e-12)
