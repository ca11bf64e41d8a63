"""What every model shares: its fields, input reading, irreps in/out, the family registry."""
from __future__ import annotations

import torch
from e3nn import o3

from searcher.errors import UserError

from ._registry import Registry

__all__ = ["FieldModel", "FAMILIES"]

FAMILIES: Registry[type] = Registry("model family", "model.family")


class FieldModel(torch.nn.Module):
    """Base of every family: picks input and target fields and reads inputs from a graph.

    Args:
        cfg: the resolved ``model`` section.
        fields: field name → Field (``name, kind, irreps, role, level``).
        target: name of the target field.

    ``irreps_in`` is the concatenation of ``model.node_inputs`` in their order (``1x0e``
    constant ones when the list is empty); graph-level inputs are broadcast to their nodes.
    """

    equivariant = True

    def __init__(self, cfg: dict, fields: dict, target: str) -> None:
        super().__init__()
        self.fields = dict(fields)
        targets = [f.name for f in fields.values() if f.role == "target"]
        if target not in targets:
            raise UserError.single(f"target must be one of {', '.join(targets) or 'none'}, "
                                   f"but got {target!r}", path="task.fields")
        self.target = fields[target]
        inputs = [f.name for f in fields.values() if f.role == "input"]
        bad = [n for n in cfg["node_inputs"] if n not in inputs]
        if bad:
            raise UserError.single(f"items must be input fields ({', '.join(inputs)}), but "
                                   f"got {bad[0]!r}", path="model.node_inputs")
        self.inputs = list(cfg["node_inputs"])
        self.irreps_in = sum((o3.Irreps(fields[n].irreps) for n in self.inputs),
                             o3.Irreps("")) if self.inputs else o3.Irreps("1x0e")
        self.irreps_out = o3.Irreps(self.target.irreps)
        self.graph_level = self.target.level == "graph"

    def read_inputs(self, data, batch: torch.Tensor) -> torch.Tensor:
        """``[N, irreps_in.dim]`` node inputs of ``data``."""
        if not self.inputs:
            return data.pos.new_ones(data.pos.shape[0], 1)
        parts = []
        for name in self.inputs:
            x = getattr(data, name)
            parts.append(x[batch] if self.fields[name].level == "graph" else x)
        return torch.cat(parts, -1)
