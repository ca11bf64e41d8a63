"""Random frames for training the non-equivariant baselines on turned (and mirrored) copies.

A baseline trained this way sees every orientation of its data, which is the fair way to
compare it with an equivariant model (common practice in the equivariance literature:
augmentation is the non-equivariant competitor's best defence).  Rather than rotating the
data, the model turns its own inputs: in training mode it draws one orthogonal matrix ``R``
per forward pass, reads ``x' = D_in(R) x`` and ``r' = R r`` for every relative position, and
returns ``D_out(R)^T f(x', r')``.  The loss is a sum of squares over irrep blocks and
``D_out(R)`` is orthogonal, so ``|D^T f(Rx) − y|² = |f(Rx) − D y|²``: exactly the loss of
training on the turned pair ``(R x, D y)`` (derived).

``R`` is Haar-distributed on O(3) (``rotate_reflect``) or SO(3) (``rotate``): the Q factor of
a Gaussian matrix with its column signs fixed by R's diagonal (Mezzadri 2007, "How to generate
random matrices from the classical compact groups", Notices AMS 54); for SO(3) an improper
draw is multiplied by −I, which is central, so the result stays Haar.  Draws use torch's
global generator, which the run's seed fixes.
"""
from __future__ import annotations

import torch
from e3nn import o3

__all__ = ["FRAME_MODES", "random_frame", "FrameTurn"]

from searcher.options import AUGMENT_MODES as FRAME_MODES


def random_frame(mode: str, dtype=torch.float32, generator: torch.Generator | None = None
                 ) -> torch.Tensor:
    """One Haar-random 3×3 orthogonal matrix: proper for ``rotate``, O(3) for
    ``rotate_reflect``."""
    if mode not in FRAME_MODES[1:]:
        raise ValueError(f"frame mode must be one of {', '.join(FRAME_MODES[1:])}, got {mode!r}")
    g = torch.randn(3, 3, dtype=torch.float64, generator=generator)
    q, r = torch.linalg.qr(g)
    q = q * torch.sign(torch.diagonal(r))
    if mode == "rotate" and torch.det(q) < 0:
        q = -q
    return q.to(dtype)


class FrameTurn:
    """The turn of one forward pass: maps inputs and relative positions into a random frame
    and the output back.

    Args:
        irreps_in, irreps_out: the model's input and output irreps.
        mode: one of :data:`FRAME_MODES`; ``none`` (or eval mode) turns nothing.
    """

    def __init__(self, irreps_in: o3.Irreps, irreps_out: o3.Irreps, mode: str) -> None:
        if mode not in FRAME_MODES:
            raise ValueError(f"model.augment must be one of {', '.join(FRAME_MODES)}, "
                             f"got {mode!r}")
        self.irreps_in, self.irreps_out, self.mode = irreps_in, irreps_out, mode

    def draw(self, like: torch.Tensor, training: bool):
        """``(d_in, rot, d_out)`` for this pass, or None when nothing is turned."""
        if self.mode == "none" or not training:
            return None
        rot = random_frame(self.mode, torch.float64)
        d_in = self.irreps_in.D_from_matrix(rot).to(like.dtype).to(like.device)
        d_out = self.irreps_out.D_from_matrix(rot).to(like.dtype).to(like.device)
        return d_in, rot.to(like.dtype).to(like.device), d_out

    @staticmethod
    def inputs(turn, x: torch.Tensor) -> torch.Tensor:
        return x if turn is None else x @ turn[0].T

    @staticmethod
    def vectors(turn, v: torch.Tensor) -> torch.Tensor:
        return v if turn is None else v @ turn[1].T

    @staticmethod
    def back(turn, out: torch.Tensor) -> torch.Tensor:
        return out if turn is None else out @ turn[2]
