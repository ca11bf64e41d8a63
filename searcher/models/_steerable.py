"""SEGNN (Brandstetter et al., ICLR 2022): steerable message passing.

Messages and updates are steerable MLPs: tensor products with shared per-layer weights,
conditioned on edge attributes (messages) or node attributes (updates), with gated
nonlinearities.  Invariant edge inputs are concatenated to ``[h_i, h_j]`` as scalars.
"""
from __future__ import annotations

import torch
from e3nn import o3

from ._base import FAMILIES
from ._blocks import per_edge
from ._equivariant import EquivariantModel
from ._geometry import EdgeContext
from ._irreps import BiasedTensorProduct, GatedTensorProduct

__all__ = ["SteerableModel", "SteerableLayer"]


class SteerableLayer(torch.nn.Module):
    """One SEGNN layer.

    ``m_ij = φ_m([h_i, h_j, s_ij]; a_ij)``, ``m_i = agg_j m_ij``,
    ``Δh_i = φ_u([h_i, m_i]; a_i)`` with two tensor-product layers each (the last update
    layer ungated).

    Shapes:
        ``h [N, hidden.dim]`` → ``[N, hidden.dim]``.
    """

    def __init__(self, hidden, irreps_edge_attr, irreps_node_attr, invariant_count: int,
                 aggregate: torch.nn.Module, act: str) -> None:
        super().__init__()
        self.irreps_in = self.irreps_out = o3.Irreps(hidden)
        msg_in = hidden + hidden + (o3.Irreps(f"{invariant_count}x0e") if invariant_count
                                    else o3.Irreps(""))
        self.message = torch.nn.ModuleList([
            per_edge(GatedTensorProduct(msg_in, irreps_edge_attr, hidden, act)),
            per_edge(GatedTensorProduct(hidden, irreps_edge_attr, hidden, act))])
        self.aggregate = aggregate
        self.update = torch.nn.ModuleList([
            GatedTensorProduct(hidden + hidden, irreps_node_attr, hidden, act),
            BiasedTensorProduct(hidden, irreps_node_attr, hidden)])

    def forward(self, h: torch.Tensor, ctx: EdgeContext) -> torch.Tensor:
        m = torch.cat([h[ctx.dst], h[ctx.src], ctx.edge_scalars], -1)
        for tp in self.message:
            m = tp(m, ctx.edge_attr)
        u = torch.cat([h, self.aggregate(m, ctx)], -1)
        for tp in self.update:
            u = tp(u, ctx.node_attr)
        return u


@FAMILIES.register("steerable")
class SteerableModel(EquivariantModel):
    """SEGNN-style model; see :class:`EquivariantModel` for the arguments."""

    def make_layer(self) -> torch.nn.Module:
        g = self.geometry
        return SteerableLayer(self.hidden, g.irreps_edge_attr, g.irreps_node_attr,
                              g.invariant_count, self.aggregate, self.cfg["activation"])
