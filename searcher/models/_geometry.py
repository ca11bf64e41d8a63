"""Edge and node attributes computed once per forward pass.

Cached geometry: a graph may carry ``edge_sh`` ``[E, (lmax+1)²]`` (spherical harmonics of
``edge_vec``, e3nn 'component' normalisation, unit vectors), ``edge_rbf`` ``[E, count]``
(radial basis times envelope of ``|edge_vec|``) and ``edge_geometry`` (the string
:attr:`Geometry.key` they were computed with).  They are used only when the key matches
the model's own settings; :func:`attach_geometry` writes all three, and on request the
whole parameter-free :class:`EdgeContext` as ``edge_context`` (``(Geometry.context_key, ctx)``).
"""
from __future__ import annotations

from dataclasses import dataclass

import torch
from e3nn import o3
from torch_geometric.utils import scatter

from searcher.errors import UserError

from ._radial import RadialEmbedding

__all__ = ["Geometry", "EdgeContext", "attach_geometry", "graph_batch", "EDGE_INVARIANTS",
           "NODE_ATTRS"]

EDGE_INVARIANTS = ("distance", "speed_jump", "pressure_jump", "radial_velocity")
NODE_ATTRS = ("mean_edge", "field", "both", "none")


@dataclass(frozen=True)
class EdgeContext:
    """What every block needs about the graph, computed once per forward pass."""

    src: torch.Tensor          # [E] source j
    dst: torch.Tensor          # [E] destination i (messages aggregate here)
    num_nodes: int
    edge_attr: torch.Tensor    # [E, irreps_edge_attr.dim] SH of edge_vec (+ SH of Δv)
    edge_rbf: torch.Tensor     # [E, count] radial basis × envelope
    edge_scalars: torch.Tensor  # [E, invariant_count] invariant edge inputs, config order
    edge_jumps: torch.Tensor   # [E, k] the invariants other than distance
    node_attr: torch.Tensor    # [N, irreps_node_attr.dim]
    batch: torch.Tensor        # [N] graph index of each node
    num_graphs: int


def _vector_field(fields: dict, name: str, key: str):
    field = fields.get(name)
    if field is None or field.role != "input" or field.level != "node" \
            or o3.Irreps(field.irreps) != o3.Irreps("1x1o"):
        choices = [f.name for f in fields.values() if f.role == "input" and f.level == "node"
                   and o3.Irreps(f.irreps) == o3.Irreps("1x1o")]
        raise UserError.single(f"must name a node input vector field (one of "
                               f"{', '.join(choices) or 'none available'}), but got {name!r}",
                               path=key)
    return field


def graph_batch(data) -> tuple[torch.Tensor, int]:
    """``(batch [N], num_graphs)`` of a Batch, or of a single graph (all zeros, 1)."""
    n = int(data.pos.shape[0])
    batch = getattr(data, "batch", None)
    if batch is None:
        return torch.zeros(n, dtype=torch.long, device=data.pos.device), 1
    return batch, int(getattr(data, "num_graphs", 1) or 1)


class Geometry(torch.nn.Module):
    """Edge SH, radial basis, invariant edge scalars and node attributes of a graph.

    Args:
        cfg: the resolved ``model`` section.
        fields: field name → Field (``name, kind, irreps, role, level``).

    Invariant edge scalars (``model.edge_invariants``): ``distance`` = the radial basis;
    ``speed_jump`` = |v_j - v_i|; ``radial_velocity`` = (v_j - v_i)·r̂ with r̂ along
    ``edge_vec``, v being ``model.node_attr_field``; ``pressure_jump`` = p_j - p_i with p
    the first scalar (0e) node input field.
    """

    def __init__(self, cfg: dict, fields: dict) -> None:
        super().__init__()
        lmax = int(cfg["edge_attrs"]["lmax"])
        sh_irreps = o3.Irreps.spherical_harmonics(lmax)
        self.sh = o3.SphericalHarmonics(sh_irreps, normalize=True, normalization="component")
        rad = cfg["radial"]
        self.radial = RadialEmbedding(rad["basis"], rad["count"], rad["cutoff"],
                                      rad["envelope"], rad["power"],
                                      rad.get("scale", "absolute"))
        self.invariants = list(cfg["edge_invariants"])
        bad = [n for n in self.invariants if n not in EDGE_INVARIANTS]
        if bad:
            raise UserError.single(f"items must be in {', '.join(EDGE_INVARIANTS)}, but got "
                                   f"{bad[0]!r}", path="model.edge_invariants")
        self.node_attrs = cfg["node_attrs"]
        if self.node_attrs not in NODE_ATTRS:
            raise UserError.single(f"must be one of {', '.join(NODE_ATTRS)}, but got "
                                   f"{self.node_attrs!r}", path="model.node_attrs")
        needs_v = self.node_attrs in ("field", "both") or \
            {"speed_jump", "radial_velocity"} & set(self.invariants)
        self.velocity = _vector_field(fields, cfg["node_attr_field"],
                                      "model.node_attr_field").name if needs_v else ""
        self.extra = _vector_field(fields, cfg["edge_attrs"]["extra_vector"],
                                   "model.edge_attrs.extra_vector").name \
            if cfg["edge_attrs"]["extra_vector"] else ""
        self.pressure = ""
        if "pressure_jump" in self.invariants:
            scalars = [f.name for f in fields.values() if f.role == "input"
                       and f.level == "node" and o3.Irreps(f.irreps) == o3.Irreps("1x0e")]
            if not scalars:
                raise UserError.single("pressure_jump needs a scalar node input field, but "
                                       "the task has none", path="model.edge_invariants")
            self.pressure = scalars[0]
        self.irreps_edge_attr = sh_irreps + sh_irreps if self.extra else sh_irreps
        self.irreps_node_attr = o3.Irreps("1x0e") if self.node_attrs == "none" else sh_irreps
        self.invariant_count = sum(self.radial.count if n == "distance" else 1
                                   for n in self.invariants)
        self.key = f"sh{lmax}|{self.radial.extra_repr()}"
        # Everything the edge context depends on: it holds no parameters, so a fixed batch
        # can keep the whole context, not only its SH and radial basis.
        self.context_key = "|".join([self.key, ",".join(self.invariants), self.node_attrs,
                                     self.velocity, self.extra, self.pressure])

    def cached(self, data) -> tuple[torch.Tensor, torch.Tensor] | None:
        """``(edge_sh, edge_rbf)`` from the graph when computed with this model's settings."""
        key = getattr(data, "edge_geometry", None)
        keys = key if isinstance(key, (list, tuple)) else [key]
        if keys and all(k == self.key for k in keys) and "edge_sh" in data \
                and "edge_rbf" in data:
            return data.edge_sh, data.edge_rbf
        return None

    def compute(self, edge_vec: torch.Tensor, receivers: torch.Tensor | None = None
                ) -> tuple[torch.Tensor, torch.Tensor]:
        """``(edge_sh [E, sh.dim], edge_rbf [E, count])`` from relative positions (and the
        receiving node of each edge, which ``model.radial.scale: local`` needs)."""
        return self.sh(edge_vec), self.radial(edge_vec.norm(dim=-1), receivers)

    def forward(self, data) -> EdgeContext:
        kept = getattr(data, "edge_context", None)
        if isinstance(kept, tuple) and kept[0] == self.context_key:
            return kept[1]
        src, dst = data.edge_index[0], data.edge_index[1]
        n = int(data.pos.shape[0])
        batch, num_graphs = graph_batch(data)
        edge_vec = data.edge_vec
        edge_sh, edge_rbf = self.cached(data) or self.compute(edge_vec, dst)
        v = getattr(data, self.velocity) if self.velocity else None
        edge_attr = torch.cat([edge_sh, self.sh(getattr(data, self.extra)[src]
                                                - getattr(data, self.extra)[dst])], -1) \
            if self.extra else edge_sh
        scalars, jumps = [], []
        for name in self.invariants:
            if name == "distance":
                scalars.append(edge_rbf)
                continue
            if name == "speed_jump":
                scalars.append((v[src] - v[dst]).norm(dim=-1, keepdim=True))
            elif name == "radial_velocity":
                unit = edge_vec / edge_vec.norm(dim=-1, keepdim=True).clamp_min(1e-12)
                scalars.append(((v[src] - v[dst]) * unit).sum(-1, keepdim=True))
            else:
                p = getattr(data, self.pressure)
                scalars.append(p[src] - p[dst])
            jumps.append(scalars[-1])
        edge_scalars = torch.cat(scalars, -1) if scalars else edge_rbf[:, :0]
        edge_jumps = torch.cat(jumps, -1) if jumps else edge_rbf[:, :0]
        if self.node_attrs == "none":
            node_attr = edge_sh.new_ones(n, 1)
        else:
            node_attr = 0
            if self.node_attrs in ("mean_edge", "both"):
                # SEGNN: a node's attribute is the mean of its incoming edge SH.
                node_attr = scatter(edge_sh, dst, 0, dim_size=n, reduce="mean")
            if self.node_attrs in ("field", "both"):
                node_attr = node_attr + self.sh(v)
        return EdgeContext(src, dst, n, edge_attr, edge_rbf, edge_scalars, edge_jumps,
                           node_attr, batch, num_graphs)


def attach_geometry(model: torch.nn.Module, data, *, context: bool = False) -> None:
    """Cache the model's edge SH and radial basis on ``data`` (see the module docstring);
    arrays ``data`` already holds for the same :attr:`Geometry.key` are kept.

    Args:
        model: a model with ``.geometry``.
        data: a graph or batch whose positions and input fields stay fixed.
        context: also keep the whole :class:`EdgeContext` (node attributes, invariant edge
            scalars) as ``data.edge_context``; the model then skips its geometry step.  Only
            for data that is not changed afterwards (the trainer's fixed batches).
    """
    geometry = model.geometry
    with torch.no_grad():
        # Geometry the graphs already carry (the trainer's on-disk store) is reused.
        data.edge_sh, data.edge_rbf = geometry.cached(data) or geometry.compute(
            data.edge_vec, data.edge_index[1])
        data.edge_geometry = geometry.key
        if context:
            data.edge_context = (geometry.context_key, geometry(data))
