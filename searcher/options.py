"""The names each name → implementation registry answers to, declared once, free of torch.

The study language's option lists (``searcher.spec``) are read from here, and every registry
(families, radial bases, envelopes, activations in ``searcher.models``; samplers and pruners
in ``searcher.search``) refuses to register a name that is not declared here, so a name
cannot be accepted by a study and lack an implementation, or the other way round (tested
in ``tests/test_options.py``).  ``spec`` may not import torch, which the model registries
need; this table is what both sides share.
"""
from __future__ import annotations

__all__ = ["AUGMENT_MODES", "DATA_DERIVED", "KERNEL_CHOICES", "KERNEL_ENV", "REGISTERED",
           "declared", "kernel_choice"]

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

# The environment variable that picks the tensor-product route
# (``searcher.models._compiled``): empty or "compiled" builds and uses the C++ kernel where it
# can, "pytorch" keeps the fused PyTorch path.
KERNEL_ENV = "SEARCHER_KERNELS"
KERNEL_CHOICES: tuple[str, ...] = ("compiled", "pytorch")

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


def kernel_choice(environ=None) -> str:
    """The route ``SEARCHER_KERNELS`` asks for: ``"compiled"`` (also when unset) or
    ``"pytorch"``.

    Raises:
        UserError: any other value, with the allowed ones.
    """
    import os

    from searcher.errors import UserError

    raw = (os.environ if environ is None else environ).get(KERNEL_ENV, "")
    value = raw.strip().lower() or "compiled"
    if value not in KERNEL_CHOICES:
        raise UserError.single(f"must be one of {', '.join(KERNEL_CHOICES)} (or unset), but "
                               f"got {raw!r}", path=f"environment {KERNEL_ENV}")
    return value
