"""``build_model``: the one door from a resolved ``model`` section to a module."""
from __future__ import annotations

import torch

from ._base import FAMILIES
# Importing the family modules fills the registry.
from . import _baselines, _gated, _steerable, _tensor_basis  # noqa: F401
from ._build_cache import install, lean_codegen, unfused
from ._cutoff import resolve_cutoff
from ._fused import fuse_products

install()  # e3nn's structure-only set-up is generated once per process (see _build_cache)

__all__ = ["build_model", "KERNELS"]

KERNELS = ("fused", "e3nn")


def build_model(model_cfg: dict, fields: dict, target: str, *,
                stats: dict | None = None, kernels: str = "fused") -> torch.nn.Module:
    """Build the model a resolved ``model`` section describes.

    Args:
        model_cfg: the resolved ``model`` section (keys of ``defaults.yaml``).
        fields: field name → Field (``name, kind, irreps, role, level``).
        target: the target field's name.
        stats: optional data statistics (as :func:`searcher.data.graph_stats` gives them);
            ``degree_mean`` (mean incoming edges per node) is the constant of
            ``aggregate: degree`` (1 when absent); ``edge_len_max``/``local_len_max``
            give a ``model.radial.cutoff: from_data`` its number (:func:`resolve_cutoff`).
        kernels: ``"fused"`` (default) evaluates the ``uvw``/``uvu`` tensor products with
            :mod:`searcher.models._fused` (same weights and state dict, same sums in another
            order, 1.1-1.5x faster training steps); ``"e3nn"`` keeps e3nn's generated code
            (the benchmark's plain-e3nn reference).

    Returns:
        A module with ``irreps_in``, ``irreps_out``, ``equivariant``, ``fields``, ``target``;
        ``forward(data)`` gives ``[N, dim]`` (node target) or ``[B, dim]`` (graph target).

    Raises:
        UserError: unknown names, fields the task lacks, or unreachable target irreps.

    Example::

        model = build_model(cfg["model"], fields, "anisotropy")
        model(graph).shape   # torch.Size([12, 5])
    """
    if kernels not in KERNELS:
        raise ValueError(f"kernels must be one of {KERNELS}, got {kernels!r}")
    model_cfg = resolve_cutoff(model_cfg, stats)
    if kernels == "e3nn":
        return FAMILIES.get(model_cfg["family"])(model_cfg, fields, target, stats)
    with lean_codegen():
        model = FAMILIES.get(model_cfg["family"])(model_cfg, fields, target, stats)
    fuse_products(model)
    # A product class the fused kernel does not take would be left without e3nn code.
    left = [name for name, m in model.named_modules() if unfused(m) and not hasattr(
        model.get_submodule(name.rpartition(".")[0]), "_fused")]
    if left:
        raise RuntimeError(f"products built without e3nn code were not fused: {left}")
    return model
