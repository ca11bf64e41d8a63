"""Gated interaction (NequIP; Batzner et al., Nature Communications 13, 2453, 2022).

A radial MLP on the radial basis (times envelope, plus any further invariant edge scalars)
gives per-edge weights of a depthwise ('uvu') tensor product of neighbour features with the
edge SH; after aggregation a linear mixer plus a node-attribute self-connection feed a gate.
"""
from __future__ import annotations

import torch
from e3nn import nn as enn
from e3nn import o3

from ._base import FAMILIES
from ._blocks import per_edge
from ._equivariant import EquivariantModel
from ._fused import gathered_sum
from ._geometry import EdgeContext
from ._irreps import make_gate
from ._registry import activation

__all__ = ["GatedModel", "GatedInteraction"]


class GatedInteraction(torch.nn.Module):
    """One NequIP interaction block.

    Shapes:
        ``h [N, hidden.dim]`` → ``[N, hidden.dim]``.
    """

    def __init__(self, hidden, irreps_edge_attr, irreps_node_attr, radial_in: int,
                 width: int, aggregate: torch.nn.Module, act: str) -> None:
        super().__init__()
        hidden = o3.Irreps(hidden)
        self.irreps_in = self.irreps_out = hidden
        self.gate = make_gate(hidden, act)
        keep = {ir for _, ir in self.gate.irreps_in}
        mid, instructions = [], []
        for i, (mul, ir_in) in enumerate(hidden):
            for j, (_, ir_edge) in enumerate(irreps_edge_attr):
                for ir_out in ir_in * ir_edge:
                    if ir_out in keep:
                        instructions.append((i, j, len(mid), "uvu", True))
                        mid.append((mul, ir_out))
        mid = o3.Irreps(mid)
        mid_sorted, perm, _ = mid.sort()
        instructions = [(a, b, perm[c], mode, w) for a, b, c, mode, w in instructions]
        self.linear_in = o3.Linear(hidden, hidden)
        self.tp = per_edge(o3.TensorProduct(hidden, irreps_edge_attr, mid_sorted, instructions,
                                            shared_weights=False, internal_weights=False))
        self.radial = per_edge(enn.FullyConnectedNet([radial_in, width, self.tp.weight_numel],
                                                     activation(act)))
        self.aggregate = aggregate
        self.linear_out = o3.Linear(mid_sorted.simplify(), self.gate.irreps_in)
        self.self_connection = o3.FullyConnectedTensorProduct(hidden, irreps_node_attr,
                                                              self.gate.irreps_in)

    def forward(self, h: torch.Tensor, ctx: EdgeContext) -> torch.Tensor:
        w = self.radial(torch.cat([ctx.edge_rbf, ctx.edge_jumps], -1))
        x = self.linear_in(h)
        # One compiled pass gathers the senders, multiplies and sums at the receivers where it
        # applies; otherwise per-edge messages are formed and aggregated.
        summed = gathered_sum(self.tp, x, ctx.edge_attr, w, ctx.src, ctx.dst, ctx.num_nodes)
        agg = (self.aggregate(self.tp(x[ctx.src], ctx.edge_attr, w), ctx) if summed is None
               else self.aggregate.finish(summed, ctx))
        out = self.linear_out(agg) + self.self_connection(h, ctx.node_attr)
        return self.gate(out)


@FAMILIES.register("gated")
class GatedModel(EquivariantModel):
    """NequIP-style model; see :class:`EquivariantModel` for the arguments.

    The radial MLP always sees the radial basis; ``model.edge_invariants`` other than
    ``distance`` are appended to it (``distance`` itself is not repeated).
    """

    def make_layer(self) -> torch.nn.Module:
        g = self.geometry
        jumps = sum(1 for name in g.invariants if name != "distance")
        return GatedInteraction(self.hidden, g.irreps_edge_attr, g.irreps_node_attr,
                                g.radial.count + jumps, int(self.cfg["width"]),
                                self.aggregate, self.cfg["activation"])
