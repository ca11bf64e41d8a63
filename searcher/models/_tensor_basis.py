"""The tensor-basis network (Ling, Kurzawski & Templeton 2016, J. Fluid Mech. 807, 155–166).

A pointwise learned closure: the anisotropy is ``b = Σ_n g_n(λ) T_n`` over Pope's (1975,
J. Fluid Mech. 72, 331–340) integrity basis of ten tensors built from the strain rate ``S``
and the rotation rate ``Ω``, with the coefficients ``g_n`` given by an MLP of the five
invariants ``λ``.  Every ``T_n`` is symmetric, traceless and turns with the frame, and every
``λ`` is frame invariant, so the network is O(3)-equivariant by construction; it passes no
messages.  It is the standard learned baseline of data-driven turbulence modelling, and the
question it answers in a dossier is whether message passing buys anything over it.

Inputs (``model.node_inputs``): one strain-rate field of kind ``traceless_symmetric_tensor``
or ``symmetric_tensor`` (its trace is dropped) and one rotation field of kind
``axial_vector`` (the vorticity ``ω``; ``Ω_ij = −½ ε_ijk ω_k``, derived from ``Ω = (G − Gᵀ)/2``
and ``ω = ∇ × u``).  Target: a ``traceless_symmetric_tensor``.  ``model.layers`` hidden layers
of ``model.width`` units (Ling et al. used 8 of 30).  The network reads the normalised fields:
normalising divides ``S`` and ``ω`` by positive constants, which maps the invariants one to
one and rescales each ``T_n`` by a constant that the learned ``g_n`` absorb (derived).
"""
from __future__ import annotations

import numpy as np
import torch

from searcher.errors import UserError

from ._base import FAMILIES, FieldModel
from ._geometry import graph_batch
from ._baselines import _MLP

__all__ = ["TensorBasisNet", "integrity_basis", "invariants", "STRAIN_KINDS"]

STRAIN_KINDS = ("traceless_symmetric_tensor", "symmetric_tensor")
_LEVI = np.zeros((3, 3, 3))
for _i, _j, _k in ((0, 1, 2), (1, 2, 0), (2, 0, 1)):
    _LEVI[_i, _j, _k], _LEVI[_i, _k, _j] = 1.0, -1.0


def _tr(m: torch.Tensor) -> torch.Tensor:
    return torch.diagonal(m, dim1=-2, dim2=-1).sum(-1)[..., None, None]


def integrity_basis(s: torch.Tensor, w: torch.Tensor) -> torch.Tensor:
    """Pope's ten basis tensors of ``S`` (symmetric, traceless) and ``Ω`` (antisymmetric).

    As listed by Ling et al. (2016, eq. 3.7)::

        T1 = S                      T6 = Ω²S + SΩ² − ⅔ tr(SΩ²) I
        T2 = SΩ − ΩS                T7 = ΩSΩ² − Ω²SΩ
        T3 = S² − ⅓ tr(S²) I        T8 = SΩS² − S²ΩS
        T4 = Ω² − ⅓ tr(Ω²) I        T9 = Ω²S² + S²Ω² − ⅔ tr(S²Ω²) I
        T5 = ΩS² − S²Ω              T10 = ΩS²Ω² − Ω²S²Ω

    Shapes:
        ``[..., 3, 3]`` each → ``[..., 10, 3, 3]``.
    """
    eye = torch.eye(3, dtype=s.dtype, device=s.device)
    s2, w2 = s @ s, w @ w
    sw, ws = s @ w, w @ s
    terms = (s, sw - ws, s2 - _tr(s2) * eye / 3, w2 - _tr(w2) * eye / 3,
             w @ s2 - s2 @ w, w2 @ s + s @ w2 - 2 * _tr(s @ w2) * eye / 3,
             w @ s @ w2 - w2 @ s @ w, s @ w @ s2 - s2 @ w @ s,
             w2 @ s2 + s2 @ w2 - 2 * _tr(s2 @ w2) * eye / 3,
             w @ s2 @ w2 - w2 @ s2 @ w)
    return torch.stack(terms, dim=-3)


def invariants(s: torch.Tensor, w: torch.Tensor) -> torch.Tensor:
    """``λ = (tr S², tr Ω², tr S³, tr Ω²S, tr Ω²S²)`` (Ling et al. 2016, eq. 3.8); ``[..., 5]``."""
    s2, w2 = s @ s, w @ w
    return torch.cat([_tr(m)[..., 0] for m in (s2, w2, s2 @ s, w2 @ s, w2 @ s2)], -1)


@FAMILIES.register("tensor_basis")
class TensorBasisNet(FieldModel):
    """``b = Σ g_n(λ) T_n``; see the module docstring."""

    def __init__(self, cfg: dict, fields: dict, target: str, stats: dict | None = None) -> None:
        super().__init__(cfg, fields, target)
        from searcher.data import irreps_dim, to_cartesian

        kinds = {n: self.fields[n].kind for n in self.inputs}
        strain = [n for n, k in kinds.items() if k in STRAIN_KINDS]
        rotation = [n for n, k in kinds.items() if k == "axial_vector"]
        if len(strain) != 1 or len(rotation) != 1 or len(self.inputs) != 2:
            raise UserError.single(
                "the tensor_basis family needs exactly two node inputs: one strain-rate field "
                f"({' or '.join(STRAIN_KINDS)}) and one axial_vector rotation field, but got "
                f"{', '.join(f'{n} ({k})' for n, k in kinds.items()) or 'none'}",
                path="model.node_inputs")
        if self.target.kind != "traceless_symmetric_tensor" or self.graph_level:
            raise UserError.single(
                "the tensor_basis family predicts a node-level traceless_symmetric_tensor, but "
                f"the target {self.target.name!r} is a {self.target.level}-level "
                f"{self.target.kind}", path="model.family")
        # Offsets of the two fields in the concatenated inputs, and the 2e basis tensors.
        dims = [irreps_dim(self.fields[n].kind) for n in self.inputs]
        start = dict(zip(self.inputs, np.cumsum([0] + dims[:-1]).tolist()))
        self.strain_at, self.rotation_at = start[strain[0]], start[rotation[0]]
        self.strain_trace = self.fields[strain[0]].kind == "symmetric_tensor"
        # Constants kept in float64 and cast per call: a float32 copy of the 2e basis (entries
        # such as 1/√6) would cost the float64 gate its exactness.
        self._constants = {None: (to_cartesian("traceless_symmetric_tensor", np.eye(5)), _LEVI)}
        w = int(cfg["width"])
        self.coefficients = _MLP([5] + [w] * int(cfg["layers"]) + [10], cfg["activation"])

    def forward(self, data) -> torch.Tensor:
        batch, _ = graph_batch(data)
        x = self.read_inputs(data, batch)
        basis, levi = self._cast(x)
        a = self.strain_at + (1 if self.strain_trace else 0)   # 0e+2e: skip the trace row
        s = torch.einsum("nk,kij->nij", x[:, a:a + 5], basis)
        omega = x[:, self.rotation_at:self.rotation_at + 3]
        w = -0.5 * torch.einsum("ijk,nk->nij", levi, omega)
        g = self.coefficients(invariants(s, w))
        b = torch.einsum("nm,nmij->nij", g, integrity_basis(s, w))
        return torch.einsum("nij,kij->nk", b, basis)

    def _cast(self, like: torch.Tensor):
        key = (like.dtype, like.device)
        if key not in self._constants:
            self._constants[key] = tuple(torch.as_tensor(c, dtype=like.dtype, device=like.device)
                                         for c in self._constants[None])
        return self._constants[key]

