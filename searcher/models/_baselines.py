"""Non-equivariant baselines: they show what the equivariant families buy.

Both read the raw components of their inputs as plain numbers; ``coord_mlp`` also sees the
raw relative coordinates ``edge_vec``, so rotations change its output.  The gate measures
their equivariance error and never rejects them.  ``model.augment`` trains them on randomly
turned (``rotate``) or turned and mirrored (``rotate_reflect``) frames (:mod:`._frames`).
"""
from __future__ import annotations

import torch
from torch_geometric.utils import scatter

from ._base import FAMILIES, FieldModel
from ._blocks import Aggregate, per_edge
from ._frames import FrameTurn
from ._geometry import graph_batch
from ._registry import activation

__all__ = ["NodeMLP", "CoordMLP"]


class _MLP(torch.nn.Sequential):
    """Linear → activation → ... → Linear (no activation after the last)."""

    def __init__(self, sizes: list[int], act: str) -> None:
        fn = activation(act)
        layers: list[torch.nn.Module] = []
        for a, b in zip(sizes[:-1], sizes[1:]):
            layers += [torch.nn.Linear(a, b), _Act(fn)]
        super().__init__(*layers[:-1])


class _Act(torch.nn.Module):
    def __init__(self, fn) -> None:
        super().__init__()
        self.fn = fn

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return self.fn(x)


class _Baseline(FieldModel):
    equivariant = False

    def __init__(self, cfg: dict, fields: dict, target: str) -> None:
        super().__init__(cfg, fields, target)
        self.turn = FrameTurn(self.irreps_in, self.irreps_out, cfg.get("augment", "none"))

    def pool(self, out: torch.Tensor, batch: torch.Tensor, num_graphs: int) -> torch.Tensor:
        if self.graph_level:
            return scatter(out, batch, 0, dim_size=num_graphs, reduce="mean")
        return out


@FAMILIES.register("node_mlp")
class NodeMLP(_Baseline):
    """Per-node MLP on the raw input components: ``layers`` hidden layers of ``width``."""

    def __init__(self, cfg: dict, fields: dict, target: str, stats: dict | None = None) -> None:
        super().__init__(cfg, fields, target)
        w = int(cfg["width"])
        self.mlp = _MLP([self.irreps_in.dim] + [w] * int(cfg["layers"]) + [self.irreps_out.dim],
                        cfg["activation"])

    def forward(self, data) -> torch.Tensor:
        batch, num_graphs = graph_batch(data)
        x = self.read_inputs(data, batch)
        turn = self.turn.draw(x, self.training)
        out = self.pool(self.mlp(FrameTurn.inputs(turn, x)), batch, num_graphs)
        return FrameTurn.back(turn, out)


@FAMILIES.register("coord_mlp")
class CoordMLP(_Baseline):
    """Message passing with MLP messages on ``[x_i, x_j, edge_vec, |edge_vec|]``.

    ``h_i ← h_i + φ_u([h_i, agg_j φ_m([h_i, h_j, r_ij, |r_ij|])])`` for ``layers`` layers.
    """

    def __init__(self, cfg: dict, fields: dict, target: str, stats: dict | None = None) -> None:
        super().__init__(cfg, fields, target)
        w, act = int(cfg["width"]), cfg["activation"]
        self.embed = torch.nn.Linear(self.irreps_in.dim, w)
        self.messages = torch.nn.ModuleList(per_edge(_MLP([2 * w + 4, w, w], act))
                                            for _ in range(int(cfg["layers"])))
        self.updates = torch.nn.ModuleList(_MLP([2 * w, w, w], act)
                                           for _ in range(int(cfg["layers"])))
        self.aggregate = Aggregate(cfg["aggregate"], (stats or {}).get("degree_mean"))
        self.out = torch.nn.Linear(w, self.irreps_out.dim)

    def forward(self, data) -> torch.Tensor:
        batch, num_graphs = graph_batch(data)
        src, dst = data.edge_index[0], data.edge_index[1]
        ctx = _Ctx(dst, data.pos.shape[0])
        x = self.read_inputs(data, batch)
        turn = self.turn.draw(x, self.training)
        h = self.embed(FrameTurn.inputs(turn, x))
        vec = FrameTurn.vectors(turn, data.edge_vec)
        rel = torch.cat([vec, vec.norm(dim=-1, keepdim=True)], -1)
        for message, update in zip(self.messages, self.updates):
            m = self.aggregate(message(torch.cat([h[dst], h[src], rel], -1)), ctx)
            h = h + update(torch.cat([h, m], -1))
        return FrameTurn.back(turn, self.pool(self.out(h), batch, num_graphs))


class _Ctx:
    """The two graph facts :class:`Aggregate` reads."""

    def __init__(self, dst: torch.Tensor, num_nodes: int) -> None:
        self.dst, self.num_nodes = dst, num_nodes
