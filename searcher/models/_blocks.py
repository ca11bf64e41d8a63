"""Shared pieces of the families: aggregation, norms, the head, pooling."""
from __future__ import annotations

import torch
from e3nn import nn as enn
from e3nn import o3
from torch_geometric.utils import scatter

from searcher.errors import UserError

from ._geometry import EdgeContext
from ._irreps import BiasedTensorProduct

__all__ = ["AGGREGATES", "NORMS", "Aggregate", "InstanceNorm", "make_norm", "Head",
           "per_edge"]

AGGREGATES = ("sum", "mean", "degree")
NORMS = ("none", "batch", "instance")


def per_edge(module: torch.nn.Module) -> torch.nn.Module:
    """Mark ``module`` as evaluated once per edge (read by the cost model)."""
    module.per_edge = True
    return module


class Aggregate(torch.nn.Module):
    """Sum, mean, or sum divided by the data's average degree (1 when unknown).

    Shapes:
        ``messages [E, d]`` → ``[N, d]`` at the destinations.
    """

    def __init__(self, mode: str, avg_degree: float | None) -> None:
        super().__init__()
        if mode not in AGGREGATES:
            raise UserError.single(f"must be one of {', '.join(AGGREGATES)}, but got {mode!r}",
                                   path="model.aggregate")
        self.mode = mode
        self.register_buffer("avg_degree", torch.tensor(float(avg_degree or 1.0)))

    def forward(self, messages: torch.Tensor, ctx: EdgeContext) -> torch.Tensor:
        if self.mode == "mean":
            return scatter(messages, ctx.dst, 0, dim_size=ctx.num_nodes, reduce="mean")
        return self.finish(scatter(messages, ctx.dst, 0, dim_size=ctx.num_nodes,
                                   reduce="sum"), ctx)

    def finish(self, summed: torch.Tensor, ctx: EdgeContext) -> torch.Tensor:
        """The aggregate from the per-node sums of the messages (a fused message pass gives
        those sums directly): divided by the in-degree (at least 1) for ``mean``, by the
        average degree for ``degree``."""
        if self.mode == "mean":
            count = torch.bincount(ctx.dst, minlength=ctx.num_nodes).clamp_(min=1)
            return summed / count.to(summed.dtype)[:, None]
        return summed / self.avg_degree if self.mode == "degree" else summed


class InstanceNorm(torch.nn.Module):
    """Per-graph equivariant norm, computed per irrep block over the nodes of each graph.

    0e blocks are centred on the graph mean; every block is divided by its graph RMS
    (mean over nodes and channels of |x|²/(2l+1)), then scaled per channel; 0e gets a bias.
    Norms of irreps are rotation invariant, so the result is equivariant.

    Shapes:
        ``x [N, irreps.dim]``, ``batch [N]`` → ``[N, irreps.dim]``.
    """

    def __init__(self, irreps, eps: float = 1e-5) -> None:
        super().__init__()
        self.irreps_in = self.irreps_out = o3.Irreps(irreps)
        self.eps = eps
        self.weight = torch.nn.Parameter(torch.ones(self.irreps_in.num_irreps))
        n0e = sum(m for m, ir in self.irreps_in if ir == o3.Irrep("0e"))
        self.bias = torch.nn.Parameter(torch.zeros(n0e))

    def forward(self, x: torch.Tensor, ctx: EdgeContext) -> torch.Tensor:
        out, iw, ib = [], 0, 0
        for (m, ir), s in zip(self.irreps_in, self.irreps_in.slices()):
            block = x[:, s].reshape(-1, m, ir.dim)
            if ir == o3.Irrep("0e"):
                mean = scatter(block, ctx.batch, 0, dim_size=ctx.num_graphs, reduce="mean")
                block = block - mean[ctx.batch]
            sq = block.pow(2).mean(dim=(1, 2))
            rms = scatter(sq, ctx.batch, 0, dim_size=ctx.num_graphs, reduce="mean")
            block = block / (rms[ctx.batch] + self.eps).sqrt()[:, None, None]
            block = block * self.weight[iw:iw + m][None, :, None]
            if ir == o3.Irrep("0e"):
                block = block + self.bias[ib:ib + m][None, :, None]
                ib += m
            iw += m
            out.append(block.reshape(-1, m * ir.dim))
        return torch.cat(out, -1)


class _BatchNorm(torch.nn.Module):
    """e3nn's BatchNorm with the common ``(x, ctx)`` call signature."""

    def __init__(self, irreps) -> None:
        super().__init__()
        self.norm = enn.BatchNorm(irreps)
        self.irreps_in = self.irreps_out = o3.Irreps(irreps)

    def forward(self, x: torch.Tensor, ctx: EdgeContext) -> torch.Tensor:
        return self.norm(x)


class _NoNorm(torch.nn.Module):
    def forward(self, x: torch.Tensor, ctx: EdgeContext) -> torch.Tensor:
        return x


def make_norm(kind: str, irreps) -> torch.nn.Module:
    """The norm named by ``model.norm`` on ``irreps``, called as ``norm(x, ctx)``."""
    if kind not in NORMS:
        raise UserError.single(f"must be one of {', '.join(NORMS)}, but got {kind!r}",
                               path="model.norm")
    return {"none": lambda: _NoNorm(), "batch": lambda: _BatchNorm(irreps),
            "instance": lambda: InstanceNorm(irreps)}[kind]()


HEAD_INIT_SCALE = 0.1


class Head(torch.nn.Module):
    """Hidden features → target irreps: a linear plus an aggregated product with edge SH.

    ``out_i = W h_i + agg_j TP(h_j, a_ij)``; pooled by the graph mean for graph targets.

    Shapes:
        ``h [N, hidden.dim]`` → ``[N, target.dim]`` or ``[B, target.dim]``.
    """

    def __init__(self, hidden, irreps_edge_attr, target, aggregate: Aggregate,
                 graph_level: bool) -> None:
        super().__init__()
        self.irreps_in, self.irreps_out = o3.Irreps(hidden), o3.Irreps(target)
        self.linear = o3.Linear(self.irreps_in, self.irreps_out)
        self.tp = per_edge(BiasedTensorProduct(self.irreps_in, irreps_edge_attr,
                                               self.irreps_out))
        self.aggregate = aggregate
        self.graph_level = graph_level
        # Start with outputs a tenth of unit scale: the targets are normalised to unit RMS
        # norm per block, so an untrained network's O(1) components would begin far above
        # the loss of predicting zero and spend its first epochs shrinking (small output
        # initialisation is common practice; zero would blind the equivariance gate).
        with torch.no_grad():
            for p in self.parameters():
                p.mul_(HEAD_INIT_SCALE)

    def forward(self, h: torch.Tensor, ctx: EdgeContext) -> torch.Tensor:
        out = self.linear(h) + self.aggregate(self.tp(h[ctx.src], ctx.edge_attr), ctx)
        if self.graph_level:
            out = scatter(out, ctx.batch, 0, dim_size=ctx.num_graphs, reduce="mean")
        return out
