"""Radial bases and cutoff envelopes for edge lengths.

Every basis maps distances ``d`` to ``count`` features on ``[0, cutoff]``; the envelope
multiplies them so that messages fade smoothly to zero at the cutoff.  Normalisation
constants follow e3nn's ``math.soft_one_hot_linspace`` (mean of the summed squares ≈ 1),
so that the same definitions can be checked against it.

Every basis is bounded on ``[0, cutoff]`` by a constant that does not depend on ``cutoff``
or on ``d/cutoff``, so very short edges (wall-refined meshes span 3–5 decades of cell
size) give features of order one rather than values that grow like ``1/d``.  The Bessel
basis is therefore used in its normalised-sinc form: DimeNet's ``sqrt(2/c) sin(nπd/c)/d``
divided by its limit ``sqrt(2/c) nπ/c`` at ``d → 0``, i.e. ``sin(nπx)/(nπx)``, ``x = d/c``,
which lies in ``[-1, 1]`` and equals 1 at ``d = 0``.

``scale: local`` divides each edge length by a local length scale, the mean length of the
edges arriving at the edge's receiving node; the cutoff is then counted in those units.
"""
from __future__ import annotations

import math
from typing import Callable

import torch

from ._registry import Registry

__all__ = ["RADIAL_BASES", "ENVELOPES", "RADIAL_SCALES", "RadialEmbedding", "local_lengths"]

RADIAL_SCALES = ("absolute", "local")

Basis = Callable[[torch.Tensor, torch.Tensor, float], torch.Tensor]
RADIAL_BASES: Registry[Basis] = Registry("radial basis", "model.radial.basis")
ENVELOPES: Registry[Callable[[torch.Tensor, int], torch.Tensor]] = Registry(
    "envelope", "model.radial.envelope")


@RADIAL_BASES.register("gaussian")
def _gaussian(d: torch.Tensor, k: torch.Tensor, c: float) -> torch.Tensor:
    # SchNet (Schütt et al. 2017): exp(-γ (d - μ_k)²), centres μ_k evenly on [0, c],
    # γ = 1/Δ² for spacing Δ; 1/1.12 is e3nn's normalisation of the same basis.
    step = c / (k.numel() - 1) if k.numel() > 1 else c
    mu = (k - 1) * step
    return torch.exp(-((d - mu) / step) ** 2) / 1.12


@RADIAL_BASES.register("bessel")
def _bessel(d: torch.Tensor, k: torch.Tensor, c: float) -> torch.Tensor:
    # DimeNet (Klicpera et al. 2020) sqrt(2/c) sin(nπd/c)/d divided by its d → 0 limit
    # sqrt(2/c)·nπ/c: sin(nπx)/(nπx), bounded by 1 whatever d/c (see the module docstring).
    # torch.sinc(t) = sin(πt)/(πt) with sinc(0) = 1, so t = n·d/c.
    return torch.sinc(k * d / c)


@RADIAL_BASES.register("cosine")
def _cosine(d: torch.Tensor, k: torch.Tensor, c: float) -> torch.Tensor:
    # cos(π/2 · (d - μ_k)/Δ) on |d - μ_k| < Δ, centres strictly inside (0, c).
    step = c / (k.numel() + 1)
    diff = (d - k * step) / step
    return torch.cos(math.pi / 2 * diff) * (diff.abs() < 1)


def _soft_step(x: torch.Tensor) -> torch.Tensor:
    # exp(-1/x) for x > 0, else 0: smooth (C-infinity) step.
    safe = torch.where(x > 0, x, torch.ones_like(x))
    return torch.where(x > 0, torch.exp(-1 / safe), torch.zeros_like(x))


@RADIAL_BASES.register("smooth_finite")
def _smooth_finite(d: torch.Tensor, k: torch.Tensor, c: float) -> torch.Tensor:
    # Compactly supported C-infinity bumps of half-width Δ around centres inside (0, c).
    step = c / (k.numel() + 1)
    diff = (d - k * step) / step
    return 1.14136 * math.exp(2.0) * _soft_step(diff + 1) * _soft_step(1 - diff)


@RADIAL_BASES.register("fourier")
def _fourier(d: torch.Tensor, k: torch.Tensor, c: float) -> torch.Tensor:
    # sin(nπd/c) on (0, c): a sine series vanishing at both ends.
    x = d / c
    return torch.sin(math.pi * k * x) / math.sqrt(0.25 + k.numel() / 2) * (x > 0) * (x < 1)


@ENVELOPES.register("polynomial")
def _polynomial(x: torch.Tensor, p: int) -> torch.Tensor:
    # DimeNet (Klicpera et al. 2020): u(x) = 1 - (p+1)(p+2)/2 x^p + p(p+2) x^(p+1)
    # - p(p+1)/2 x^(p+2) for x < 1, else 0; u(0)=1, u(1)=0, u'(1)=0.
    u = (1 - (p + 1) * (p + 2) / 2 * x ** p + p * (p + 2) * x ** (p + 1)
         - p * (p + 1) / 2 * x ** (p + 2))
    return u * (x < 1)


@ENVELOPES.register("cosine")
def _cosine_cutoff(x: torch.Tensor, p: int) -> torch.Tensor:
    # Behler (2011): ½ [cos(π d / r_c) + 1] for d ≤ r_c, else 0 (p is not used).
    return 0.5 * (torch.cos(math.pi * x) + 1) * (x < 1)


class RadialEmbedding(torch.nn.Module):
    """Radial basis times envelope, as one module so it is built once.

    Args:
        basis: name in :data:`RADIAL_BASES`.
        count: number of basis functions.
        cutoff: radius where the envelope reaches zero.
        envelope: name in :data:`ENVELOPES`.
        power: polynomial envelope exponent p.

    Shapes:
        ``d [E]`` → ``[E, count]``.

    Example:
        >>> RadialEmbedding("bessel", 8, 0.6, "polynomial", 6)(torch.rand(5)).shape
        torch.Size([5, 8])
    """

    def __init__(self, basis: str, count: int, cutoff: float, envelope: str, power: int,
                 scale: str = "absolute") -> None:
        super().__init__()
        if scale not in RADIAL_SCALES:
            from searcher.errors import UserError

            raise UserError.single(f"must be one of {', '.join(RADIAL_SCALES)}, but got "
                                   f"{scale!r}", path="model.radial.scale")
        self.basis_name, self.envelope_name, self.scale = basis, envelope, scale
        self.basis = RADIAL_BASES.get(basis)
        self.envelope = ENVELOPES.get(envelope)
        self.count, self.cutoff, self.power = int(count), float(cutoff), int(power)
        self.register_buffer("k", torch.arange(1, self.count + 1, dtype=torch.get_default_dtype()))

    def forward(self, d: torch.Tensor, receivers: torch.Tensor | None = None) -> torch.Tensor:
        if self.scale == "local":
            if receivers is None:
                raise ValueError("scale 'local' needs the receiving node of every edge")
            d = d / local_lengths(d, receivers)[receivers]
        d = d.unsqueeze(-1)
        return self.basis(d, self.k, self.cutoff) * self.envelope(d / self.cutoff, self.power)

    def extra_repr(self) -> str:
        local = ", scale=local" if self.scale == "local" else ""
        return (f"{self.basis_name}, count={self.count}, cutoff={self.cutoff}, "
                f"envelope={self.envelope_name}, power={self.power}{local}")


def local_lengths(d: torch.Tensor, receivers: torch.Tensor) -> torch.Tensor:
    """Mean length of the edges arriving at each node (1 where none arrive).

    Shapes:
        ``d [E]``, ``receivers [E]`` → ``[max(receivers) + 1]``.

    Example:
        >>> local_lengths(torch.tensor([1., 3., 10.]), torch.tensor([0, 0, 1])).tolist()
        [2.0, 10.0]
    """
    n = int(receivers.max()) + 1 if receivers.numel() else 0
    total = torch.zeros(n, dtype=d.dtype, device=d.device).index_add_(0, receivers, d)
    count = torch.zeros(n, dtype=d.dtype, device=d.device).index_add_(
        0, receivers, torch.ones_like(d))
    mean = total / count.clamp_min(1)
    # A node whose edges all have length 0 (coincident points) keeps scale 1.
    return torch.where(mean > 0, mean, torch.ones_like(mean))
