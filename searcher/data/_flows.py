"""Analytic flow families of the demo generator, in their body frame.

Every family returns, at body-frame points ``x [N, 3]``: velocity ``u [N, 3]``, velocity
gradient ``G [N, 3, 3]`` with ``G[:, i, j] = ∂u_i/∂x_j``, pressure ``p [N]`` and pressure
gradient ``∇p [N, 3]``, all analytic, density ρ = 1.  Formulas and sources:
/work/shared/REFERENCES.md ("Flow physics for the demo generator").

Each family is first evaluated at unit scale, then scaled by a speed ``U`` and a length
``L``: ``u = U f(x/L)``, ``G = (U/L) f'(x/L)``, ``p = U² p_f(x/L)``, ``∇p = (U²/L) ∇p_f``.
This keeps an Euler balance (and the radial balance of the vortices) intact.

Pressures:
* abc: Beltrami flow (``u × ω = 0``), so steady Euler gives ``p = −|u|²/2``.
* taylor_green: initial pressure ``p = (cos 2x + cos 2y)(cos 2z + 2)/16`` (V0 = 1).
* lamb_oseen: ``∂p/∂r = v_θ²/r`` integrated in closed form with ``s = r²/a``:
  ``p = −Γ²/(8π²a)·[(1 − e^(−s))²/s + 2(E1(s) − E1(2s))]`` (E1 = exponential integral).
* burgers: swirl of core ``a = 2ν/γ`` plus axisymmetric strain ``(−γx, −γy, 2γz)``;
  ``∂p/∂r = v_θ²/r − γ²r`` so the pressure is the swirl pressure plus the strain pressure.
* strain: ``p = −(α²x² + β²y² + γ²z²)/2``.
* sphere: Bernoulli, ``p = (U² − |u|²)/2`` (p∞ = 0).
"""
from __future__ import annotations

import numpy as np
from scipy.special import exp1

__all__ = ["FAMILIES", "draw_params", "evaluate_flow"]


def _abc(x, q):
    a, b, c = q["A"], q["B"], q["C"]
    X, Y, Z = x[:, 0], x[:, 1], x[:, 2]
    u = np.stack([a * np.sin(Z) + c * np.cos(Y), b * np.sin(X) + a * np.cos(Z),
                  c * np.sin(Y) + b * np.cos(X)], axis=1)
    g = np.zeros((len(x), 3, 3))
    g[:, 0, 1], g[:, 0, 2] = -c * np.sin(Y), a * np.cos(Z)
    g[:, 1, 0], g[:, 1, 2] = b * np.cos(X), -a * np.sin(Z)
    g[:, 2, 0], g[:, 2, 1] = -b * np.sin(X), c * np.cos(Y)
    p = -0.5 * (u ** 2).sum(1)
    return u, g, p, -np.einsum("nij,ni->nj", g, u)


def _taylor_green(x, q):
    sx, sy, sz = np.sin(x).T
    cx, cy, cz = np.cos(x).T
    u = np.stack([sx * cy * cz, -cx * sy * cz, np.zeros(len(x))], axis=1)
    g = np.zeros((len(x), 3, 3))
    g[:, 0] = np.stack([cx * cy * cz, -sx * sy * cz, -sx * cy * sz], axis=1)
    g[:, 1] = np.stack([sx * sy * cz, -cx * cy * cz, cx * sy * sz], axis=1)
    c2 = np.cos(2 * x)
    p = (c2[:, 0] + c2[:, 1]) * (c2[:, 2] + 2) / 16
    s2 = np.sin(2 * x)
    gp = np.stack([-2 * s2[:, 0] * (c2[:, 2] + 2), -2 * s2[:, 1] * (c2[:, 2] + 2),
                   -2 * s2[:, 2] * (c2[:, 0] + c2[:, 1])], axis=1) / 16
    return u, g, p, gp


def _swirl(x, gamma, a):
    """Gaussian-core vortex on the z axis: v_θ = Γ/(2πr)(1 − e^(−r²/a))."""
    qr = x[:, 0] ** 2 + x[:, 1] ** 2
    s = qr / a
    small = s < 1e-4
    ss = np.where(small, 1.0, s)
    # u = f(q)·(−y, x, 0) with f = v_θ/r; series near the axis avoids 0/0.
    f = np.where(small, 1 - s / 2 + s ** 2 / 6, -np.expm1(-ss) / ss) * gamma / (2 * np.pi * a)
    df = np.where(small, -1 / 2 + s / 3, (np.exp(-ss) * ss + np.expm1(-ss)) / ss ** 2)
    df = df * gamma / (2 * np.pi * a ** 2)
    w = np.stack([-x[:, 1], x[:, 0], np.zeros(len(x))], axis=1)
    rad = np.stack([x[:, 0], x[:, 1], np.zeros(len(x))], axis=1)
    u = f[:, None] * w
    g = f[:, None, None] * np.array([[0.0, -1, 0], [1, 0, 0], [0, 0, 0]])
    g = g + 2 * df[:, None, None] * np.einsum("ni,nj->nij", w, rad)
    st = np.maximum(s, 1e-300)
    bracket = np.expm1(-st) ** 2 / st + 2 * (exp1(st) - exp1(2 * st))
    p = -gamma ** 2 / (8 * np.pi ** 2 * a) * bracket
    return u, g, p, (f ** 2)[:, None] * rad


def _lamb_oseen(x, q):
    return _swirl(x, q["circulation"], q["core"])


def _strain_rates(x, rates):
    r = np.asarray(rates, dtype=np.float64)
    u = x * r
    g = np.broadcast_to(np.diag(r), (len(x), 3, 3)).copy()
    return u, g, -0.5 * ((r * x) ** 2).sum(1), -(r ** 2) * x


def _strain(x, q):
    return _strain_rates(x, (q["alpha"], q["beta"], -q["alpha"] - q["beta"]))


def _burgers(x, q):
    gm = q["stretch"]
    parts = [_swirl(x, q["circulation"], q["core"]), _strain_rates(x, (-gm, -gm, 2 * gm))]
    return tuple(a + b for a, b in zip(*parts))


def _sphere(x, q):
    """Potential flow past a sphere of radius a at the origin, stream U=1 along x."""
    a = q["radius"]
    e = np.array([1.0, 0.0, 0.0])
    r2 = (x ** 2).sum(1)
    r = np.sqrt(r2)
    ex = x @ e
    k = a ** 3 / 2
    u = e + k * (e / r[:, None] ** 3 - 3 * ex[:, None] * x / r[:, None] ** 5)
    eye = np.eye(3)
    g = k * (-3 * (np.einsum("i,nj->nij", e, x) + np.einsum("ni,j->nij", x, e)
                   + ex[:, None, None] * eye) / r[:, None, None] ** 5
             + 15 * ex[:, None, None] * np.einsum("ni,nj->nij", x, x) / r[:, None, None] ** 7)
    p = 0.5 * (1 - (u ** 2).sum(1))
    return u, g, p, -np.einsum("nij,ni->nj", g, u)


def _uniform(lo, hi):
    return lambda rng: float(rng.uniform(lo, hi))


# name -> (evaluator at unit scale, parameter name -> draw(rng)).  The sphere's body
# (radius · L around the placement centre) is kept free of probes by the generator.
FAMILIES = {
    "abc": (_abc, {"A": _uniform(0.5, 1.5), "B": _uniform(0.5, 1.5), "C": _uniform(0.5, 1.5)}),
    "taylor_green": (_taylor_green, {}),
    "burgers": (_burgers, {"circulation": _uniform(1.0, 3.0), "core": _uniform(0.05, 0.25),
                           "stretch": _uniform(0.2, 1.0)}),
    "lamb_oseen": (_lamb_oseen, {"circulation": _uniform(1.0, 3.0), "core": _uniform(0.05, 0.25)}),
    "strain": (_strain, {"alpha": _uniform(-1.0, 1.0), "beta": _uniform(-1.0, 1.0)}),
    "sphere": (_sphere, {"radius": _uniform(0.2, 0.4)}),
}


def draw_params(family: str, rng: np.random.Generator) -> dict:
    """Random parameters of one flow sample: family-specific ones plus ``U`` and ``L``."""
    _, draws = FAMILIES[family]
    params = {name: draw(rng) for name, draw in sorted(draws.items())}
    params["U"] = float(rng.uniform(0.5, 2.0))
    params["L"] = float(rng.uniform(0.5, 1.5))
    return params


def evaluate_flow(family: str, params: dict, x: np.ndarray):
    """Velocity, velocity gradient, pressure and pressure gradient at body-frame points.

    Args:
        family: a key of :data:`FAMILIES`.
        params: from :func:`draw_params` (``U`` and ``L`` default to 1).
        x: body-frame positions.

    Shapes:
        x ``[N, 3]`` → u ``[N, 3]``, G ``[N, 3, 3]``, p ``[N]``, ∇p ``[N, 3]``.
    """
    fn, _ = FAMILIES[family]
    speed, length = params.get("U", 1.0), params.get("L", 1.0)
    u, g, p, gp = fn(np.asarray(x, dtype=np.float64) / length, params)
    return (speed * u, speed / length * g, speed ** 2 * p, speed ** 2 / length * gp)
