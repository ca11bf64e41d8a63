"""Which e3nn tensor-product structures the fused kernel evaluates.

A leaf both the build cache (which generates no e3nn code for such structures) and the fused
kernels (which switch them) read, so neither has to import the other for it.
"""
from __future__ import annotations

__all__ = ["FUSED_MODES", "fusable_paths"]

FUSED_MODES = ("uvw", "uvu")


def fusable_paths(instructions) -> bool:
    """Whether the fused kernel can evaluate these e3nn instructions: at least one live
    path, and every live path ``uvw``/``uvu`` with weights."""
    live = [ins for ins in instructions if ins.path_weight != 0 and 0 not in ins.path_shape]
    return bool(live) and all(ins.connection_mode in FUSED_MODES and ins.has_weight
                              for ins in live)
