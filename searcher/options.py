"""The names each name → implementation registry answers to, declared once, free of torch.

The study language's option lists (``searcher.spec``) are read from here, and every registry
(families, radial bases, envelopes, activations in ``searcher.models``; samplers and pruners
in ``searcher.search``) refuses to register a name that is not declared here, so a name
cannot be accepted by a study and lack an implementation, or the other way round (tested
in ``tests/test_options.py``).  ``spec`` may not import torch, which the model registries
need; this table is what both sides share.
"""
from __future__ import annotations

__all__ = ["AUGMENT_MODES", "DATA_DERIVED", "REGISTERED", "declared"]

# ``model.augment``: how a non-equivariant baseline's training frames are drawn
# (``searcher.models._frames``).
AUGMENT_MODES: tuple[str, ...] = ("none", "rotate", "rotate_reflect")

REGISTERED: dict[str, tuple[str, ...]] = {
    "model.family": ("steerable", "gated", "node_mlp", "coord_mlp", "tensor_basis"),
    "model.radial.basis": ("gaussian", "bessel", "cosine", "smooth_finite", "fourier"),
    "model.radial.envelope": ("polynomial", "cosine"),
    "model.activation": ("silu", "tanh", "gelu", "softplus", "relu"),
    "search.sampler.kind": ("tpe", "random", "gp", "cmaes", "qmc", "grid"),
    "search.pruner.kind": ("none", "median", "percentile", "halving", "hyperband", "outlook"),
}

# Keys that may name, instead of a number, a value the data decide: key -> the word.  The
# spec accepts the word; searcher.models.resolve_cutoff turns it into the number.
DATA_DERIVED: dict[str, str] = {"model.radial.cutoff": "from_data"}


def declared(key: str, name: str) -> str:
    """``name`` when it is declared for the registry of config key ``key``.

    Raises:
        ValueError: a registry is given a name the study language does not know.
    """
    if name not in REGISTERED.get(key, ()):
        raise ValueError(f"{name!r} must be declared for {key} in searcher/options.py before "
                         f"it is registered; declared: {', '.join(REGISTERED.get(key, ()))}")
    return name
