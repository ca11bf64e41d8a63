"""The demo target: Reynolds-stress anisotropy from an algebraic closure of the local gradient.

Conventions (derived here, used everywhere in the package):

* velocity gradient ``G_ij = (∇u)_ij = ∂u_i/∂x_j``;
* strain rate ``S = (G + Gᵀ)/2``, rotation rate ``Ω = (G − Gᵀ)/2``;
* under a rigid placement ``u'(x) = R u(Rᵀ(x − c))``, ``G' = R G Rᵀ`` (also for improper R,
  since velocity is a polar vector), hence ``S' = R S Rᵀ``, ``Ω' = R Ω Rᵀ``, ``b' = R b Rᵀ``;
* anisotropy ``b = ⟨u'u'⟩/(2k) − I/3``, so the linear eddy-viscosity model
  ``⟨u'u'⟩ = (2/3)k I − 2 C_μ (k²/ε) S`` reads ``b = −C_μ Ŝ`` with ``Ŝ = (k/ε) S``.

Time scale rule: ``τ = k/ε = c_τ / (ω0 + s + w)`` with ``s = √(2 S:S)``,
``w = √(2 Ω:Ω)``, ``c_τ = 3.33`` and a background rate ``ω0 = 2`` (flow units).  Why: in
equilibrium shear layers ``S k/ε ≈ 1/√C_μ ≈ 3.33`` (common practice), so where the mean
flow is strong (``s + w ≫ ω0``) a pure shear gets its equilibrium time scale; where it is
weak the turbulence keeps its own time scale ``c_τ/ω0`` instead of one that grows without
bound.  The rule bounds ``s̄ = τs`` and ``w̄ = τw`` by ``c_τ``, which keeps the target
bounded and frame independent (it only uses invariants), and makes ``b`` a smooth function of
the local ``S`` and ``Ω`` (``b = 0`` where the gradient vanishes).

Model: Shih, Zhu & Lumley 1993 (NASA TM 105993), the quadratic model with the defaults that
also ship in OpenFOAM's ``ShihQuadraticKE`` (which writes the gradient transposed, so its
rotation tensor is ``−Ω``); REFERENCES.md gives the signs:
``s̄ = √(2 Ŝ:Ŝ)``, ``w̄ = √(2 Ω̂:Ω̂)``, ``C_μ = (2/3)/(1.25 + s̄ + 0.9 w̄)`` and
``b = −C_μ Ŝ + [3 dev(Ŝ²) − 15 (ŜΩ̂ − Ω̂Ŝ) − 19 dev(Ω̂²)] / (2 (1000 + s̄³))``
(``dev A = A − ⅓ tr(A) I``).  In simple shear ``u = (γy, 0, 0)`` the quadratic part orders the
normal stresses ``b11 > b33 > b22``, the order measured in homogeneous shear (Tavoularis &
Corrsin 1981).

Realizability: ``b`` is symmetric and traceless by construction; its eigenvalues must lie in
``[−1/3, 2/3]`` (Schumann 1977).  The C_μ bound keeps the linear part inside (its eigenvalues
are at most ``C_μ s̄/√3 < 0.29``); should a probe still leave the range, ``b`` is scaled toward
isotropy by the largest ``λ ≤ 1`` that brings it back, and such probes are counted.
"""
from __future__ import annotations

import numpy as np

__all__ = ["strain_rotation", "time_scale", "pope_terms", "linear_anisotropy",
           "szl_anisotropy", "closure_anisotropy", "make_realizable", "C_TAU",
           "SZL_COEFFICIENTS"]

C_TAU = 3.33
OMEGA0 = 2.0
_EYE = np.eye(3)
# (c1, c2, c3) of the quadratic part (c1 T3 + c2 T2 + c3 T4) / (2 (A + s̄³)), as published.
SZL_COEFFICIENTS = (3.0, -15.0, -19.0)
_SZL_A = 1000.0


def strain_rotation(grad: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Split ``G [..., 3, 3]`` (``G_ij = ∂u_i/∂x_j``) into ``S`` and ``Ω``."""
    gt = np.swapaxes(grad, -1, -2)
    return (grad + gt) / 2, (grad - gt) / 2


def time_scale(strain: np.ndarray, rotation: np.ndarray) -> np.ndarray:
    """``k/ε = c_τ/(s + w + ω0)`` per point; ``[..., 3, 3]`` → ``[...]``."""
    s = np.sqrt(2 * np.einsum("...ij,...ij->...", strain, strain))
    w = np.sqrt(2 * np.einsum("...ij,...ij->...", rotation, rotation))
    return C_TAU / (s + w + OMEGA0)


def pope_terms(s_hat: np.ndarray, w_hat: np.ndarray) -> np.ndarray:
    """Pope (1975) integrity-basis tensors T1..T4 of non-dimensional ``Ŝ``, ``Ω̂``.

    ``T1 = Ŝ``, ``T2 = ŜΩ̂ − Ω̂Ŝ``, ``T3 = Ŝ² − ⅓ tr(Ŝ²) I``, ``T4 = Ω̂² − ⅓ tr(Ω̂²) I``.

    Shapes:
        ``[..., 3, 3]`` each → ``[..., 4, 3, 3]``.
    """
    s2, w2 = s_hat @ s_hat, w_hat @ w_hat
    tr = lambda m: np.trace(m, axis1=-2, axis2=-1)[..., None, None]  # noqa: E731
    terms = (s_hat, s_hat @ w_hat - w_hat @ s_hat, s2 - tr(s2) * _EYE / 3, w2 - tr(w2) * _EYE / 3)
    return np.stack(terms, axis=-3)


def linear_anisotropy(s_hat: np.ndarray, c_mu=0.09) -> np.ndarray:
    """Linear eddy-viscosity anisotropy ``b = −C_μ Ŝ`` (C_μ = 0.09, common practice)."""
    return -np.asarray(c_mu)[..., None, None] * s_hat


def szl_anisotropy(grad: np.ndarray, tau: np.ndarray | None = None) -> np.ndarray:
    """Shih–Zhu–Lumley quadratic anisotropy from the local velocity gradient.

    Args:
        grad: ``G [..., 3, 3]`` with ``G_ij = ∂u_i/∂x_j``.
        tau: turbulence time scale ``k/ε [...]``; None = the demo's rule :func:`time_scale`.

    Shapes:
        returns ``b [..., 3, 3]`` (before the realizability scaling).

    Example:
        >>> g = np.zeros((1, 3, 3)); g[0, 0, 1] = 1.0    # simple shear, τ = 1
        >>> b = szl_anisotropy(g, np.ones(1))[0]
        >>> bool(b[0, 0] > b[2, 2] > b[1, 1]) and bool(b[0, 1] < 0)
        True
    """
    strain, rotation = strain_rotation(np.asarray(grad, dtype=np.float64))
    if tau is None:
        tau = time_scale(strain, rotation)
    tau = np.asarray(tau, dtype=np.float64)[..., None, None]
    s_hat, w_hat = tau * strain, tau * rotation
    s_bar = np.sqrt(2 * np.einsum("...ij,...ij->...", s_hat, s_hat))
    w_bar = np.sqrt(2 * np.einsum("...ij,...ij->...", w_hat, w_hat))
    c_mu = (2 / 3) / (1.25 + s_bar + 0.9 * w_bar)
    t = pope_terms(s_hat, w_hat)
    c1, c2, c3 = SZL_COEFFICIENTS
    quad = c1 * t[..., 2, :, :] + c2 * t[..., 1, :, :] + c3 * t[..., 3, :, :]
    return linear_anisotropy(s_hat, c_mu) + quad / (2 * (_SZL_A + s_bar ** 3))[..., None, None]


def closure_anisotropy(velocity_gradient, time_scale) -> np.ndarray:
    """Realizable Shih–Zhu–Lumley anisotropy: :func:`szl_anisotropy`, then
    :func:`make_realizable`.

    Args:
        velocity_gradient: ``G [N, 3, 3]``, ``G_ij = ∂u_i/∂x_j``.
        time_scale: ``k/ε [N]`` (positive).

    Shapes:
        returns ``b [N, 3, 3]``, symmetric, traceless, eigenvalues in ``[−1/3, 2/3]``.
    """
    return make_realizable(szl_anisotropy(velocity_gradient, time_scale))[0]


def make_realizable(b: np.ndarray) -> tuple[np.ndarray, int]:
    """Scale each ``b [..., 3, 3]`` toward isotropy until its eigenvalues lie in [−1/3, 2/3].

    Returns:
        the scaled tensors and the number of points that needed scaling.
    """
    eig = np.linalg.eigvalsh(b)
    lo, hi = eig[..., 0], eig[..., -1]
    lam = np.ones(lo.shape)
    lam = np.where(lo < -1 / 3, np.minimum(lam, (-1 / 3) / np.minimum(lo, -1e-300)), lam)
    lam = np.where(hi > 2 / 3, np.minimum(lam, (2 / 3) / np.maximum(hi, 1e-300)), lam)
    return b * lam[..., None, None], int((lam < 1).sum())
