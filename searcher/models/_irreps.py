"""Irreps helpers: hidden irreps from the config, gates, reachability, biased products."""
from __future__ import annotations

import torch
from e3nn import nn as enn
from e3nn import o3

from searcher.errors import UserError
from searcher.spec import hidden_irreps as spec_hidden_irreps

from ._registry import activation

__all__ = ["hidden_irreps", "unreachable_irreps", "make_gate", "BiasedTensorProduct",
           "GatedTensorProduct"]


def hidden_irreps(model_cfg: dict) -> o3.Irreps:
    """Hidden irreps of a ``model`` section, sorted and simplified for the gates.

    The composition rule (lmax, multiplicity, taper, parity, or explicit irreps) lives in
    :func:`searcher.spec.hidden_irreps`, so the spec's reachability checks and the models
    agree.
    """
    try:
        text = spec_hidden_irreps(model_cfg["hidden"], int(model_cfg["width"]))
    except ValueError as exc:
        raise UserError.single(f"not an irreps string ({exc}): {model_cfg['hidden']['irreps']!r}",
                               path="model.hidden.irreps")
    return o3.Irreps(text).sort().irreps.simplify()


def unreachable_irreps(hidden: o3.Irreps, edge_lmax: int, target: o3.Irreps) -> list[str]:
    """Target irreps the head cannot produce.

    The head is a linear map from hidden plus a tensor product of hidden with the edge
    spherical harmonics, so (l, p) is reachable iff it is in hidden or in
    hidden ⊗ SH(edge_lmax).
    """
    have = {ir for _, ir in hidden}
    sh = o3.Irreps.spherical_harmonics(edge_lmax)
    have |= {ir for _, a in hidden for _, b in sh for ir in a * b}
    return [str(ir) for _, ir in o3.Irreps(target) if ir not in have]


def make_gate(irreps_out: o3.Irreps, act: str) -> enn.Gate:
    """An e3nn Gate whose output is ``irreps_out``: scalars activated, the rest gated.

    Even scalars use ``act``; odd scalars use tanh (an odd function keeps their parity);
    gates are even scalars through a sigmoid.
    """
    scalars = o3.Irreps([(m, ir) for m, ir in irreps_out if ir.l == 0])
    gated = o3.Irreps([(m, ir) for m, ir in irreps_out if ir.l > 0])
    acts = [activation(act) if ir.p == 1 else torch.tanh for _, ir in scalars]
    gates = o3.Irreps(f"{gated.num_irreps}x0e") if gated.num_irreps else o3.Irreps("")
    return enn.Gate(scalars, acts, gates, [torch.sigmoid] * len(gates), gated)


class BiasedTensorProduct(torch.nn.Module):
    """Fully connected tensor product with shared weights plus a bias on the 0e outputs.

    A bias is only equivariant on even scalars, so every other block stays unbiased.

    Shapes:
        ``x [*, irreps_in1.dim]``, ``attr [*, irreps_in2.dim]`` → ``[*, irreps_out.dim]``.
    """

    def __init__(self, irreps_in1, irreps_in2, irreps_out) -> None:
        super().__init__()
        self.tp = o3.FullyConnectedTensorProduct(irreps_in1, irreps_in2, irreps_out,
                                                 shared_weights=True)
        self.irreps_in1, self.irreps_in2 = self.tp.irreps_in1, self.tp.irreps_in2
        self.irreps_out = self.tp.irreps_out
        index = [i for (m, ir), s in zip(self.irreps_out, self.irreps_out.slices())
                 if ir == o3.Irrep("0e") for i in range(s.start, s.stop)]
        self.register_buffer("bias_index", torch.tensor(index, dtype=torch.long))
        self.bias = torch.nn.Parameter(torch.zeros(len(index)))

    def forward(self, x: torch.Tensor, attr: torch.Tensor) -> torch.Tensor:
        out = self.tp(x, attr)
        return out.index_add(-1, self.bias_index, self.bias.expand(*out.shape[:-1], -1))


class GatedTensorProduct(torch.nn.Module):
    """:class:`BiasedTensorProduct` into the gate's input, then the gate (SEGNN's layer)."""

    def __init__(self, irreps_in1, irreps_in2, irreps_out, act: str) -> None:
        super().__init__()
        self.gate = make_gate(o3.Irreps(irreps_out), act)
        self.tp = BiasedTensorProduct(irreps_in1, irreps_in2, self.gate.irreps_in)
        self.irreps_in1, self.irreps_in2 = self.tp.irreps_in1, self.tp.irreps_in2
        self.irreps_out = self.gate.irreps_out

    def forward(self, x: torch.Tensor, attr: torch.Tensor) -> torch.Tensor:
        return self.gate(self.tp(x, attr))
