"""The frame shared by the equivariant families: geometry → embedding → layers → head."""
from __future__ import annotations

import torch

from searcher.errors import UserError

from ._base import FieldModel
from ._blocks import Aggregate, Head, make_norm
from ._geometry import EdgeContext, Geometry
from ._irreps import BiasedTensorProduct, hidden_irreps, unreachable_irreps

__all__ = ["EquivariantModel"]


class EquivariantModel(FieldModel):
    """Message passing on irreps; a family supplies :meth:`make_layer`.

    Each layer maps hidden → hidden; with ``model.residual`` its output is added to its
    input, then ``model.norm`` is applied.

    Args:
        cfg: the resolved ``model`` section.
        fields: field name → Field.
        target: target field name.
        stats: optional data statistics; ``degree_mean`` scales ``aggregate: degree``.
    """

    def __init__(self, cfg: dict, fields: dict, target: str, stats: dict | None = None) -> None:
        super().__init__(cfg, fields, target)
        self.cfg = cfg
        self.geometry = Geometry(cfg, fields)
        self.hidden = hidden_irreps(cfg)
        missing = unreachable_irreps(self.hidden, int(cfg["edge_attrs"]["lmax"]),
                                     self.irreps_out)
        if missing:
            raise UserError.single(
                f"target irreps {', '.join(missing)} are neither in the hidden irreps "
                f"{self.hidden} nor in hidden ⊗ SH(lmax={cfg['edge_attrs']['lmax']})",
                path="model.hidden")
        self.aggregate = Aggregate(cfg["aggregate"], (stats or {}).get("degree_mean"))
        # With input_products the embedding couples the inputs with themselves too, so a
        # node's own quadratic invariants and tensors (S·S, S·Ω − Ω·S, |ω|² ...) are in reach
        # of the first layer; otherwise only their products with the node attributes are.
        self.input_products = bool(cfg["input_products"])
        embed_attr = self.geometry.irreps_node_attr
        if self.input_products:
            embed_attr = embed_attr + self.irreps_in
        self.embed = BiasedTensorProduct(self.irreps_in, embed_attr, self.hidden)
        self.layers = torch.nn.ModuleList(self.make_layer() for _ in range(int(cfg["layers"])))
        self.norms = torch.nn.ModuleList(make_norm(cfg["norm"], self.hidden)
                                         for _ in range(int(cfg["layers"])))
        self.residual = bool(cfg["residual"])
        self.head = Head(self.hidden, self.geometry.irreps_edge_attr, self.irreps_out,
                         self.aggregate, self.graph_level)

    def make_layer(self) -> torch.nn.Module:
        """One hidden → hidden layer called as ``layer(h, ctx)``."""
        raise NotImplementedError

    def forward(self, data) -> torch.Tensor:
        """Shapes: graph with ``N`` nodes, ``B`` graphs → ``[N or B, irreps_out.dim]``."""
        ctx: EdgeContext = self.geometry(data)
        x = self.read_inputs(data, ctx.batch)
        attr = torch.cat([ctx.node_attr, x], dim=1) if self.input_products else ctx.node_attr
        h = self.embed(x, attr)
        for layer, norm in zip(self.layers, self.norms):
            update = layer(h, ctx)
            h = norm(h + update if self.residual else update, ctx)
        return self.head(h, ctx)
