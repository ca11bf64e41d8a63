"""Deliberately broken blocks: what the equivariance gate must reject."""
from __future__ import annotations

import torch

__all__ = ["BrokenBias"]


class BrokenBias(torch.nn.Module):
    """A model whose output gains a term that does not transform with it.

    Args:
        model: a built model (``irreps_in``, ``irreps_out``, ``forward(data)``).
        coordinate: False adds a constant 0.1 to every l > 0 component (a fixed vector or
            tensor that a rotation should have moved); True adds 0.1 times the raw x
            coordinate of each node to the first output component (neither rotation nor
            translation invariant; node targets only).
    """

    def __init__(self, model: torch.nn.Module, coordinate: bool = False) -> None:
        super().__init__()
        self.model, self.irreps_in, self.irreps_out = model, model.irreps_in, model.irreps_out
        self.equivariant, self.coordinate = True, coordinate
        self.geometry = getattr(model, "geometry", None)
        self.bias = torch.nn.Parameter(torch.zeros(model.irreps_out.dim))
        with torch.no_grad():
            for (_, ir), s in zip(model.irreps_out, model.irreps_out.slices()):
                if ir.l > 0 and not coordinate:
                    self.bias[s] = 0.1

    def forward(self, data):
        out = self.model(data) + self.bias
        if self.coordinate:
            shift = torch.zeros_like(out)
            shift[:, 0] = 0.1 * data.pos[:, 0]
            out = out + shift
        return out
