"""Helpers behind :mod:`searcher.testing`."""
from __future__ import annotations

import contextlib
import copy
import importlib.resources
import random

import numpy as np
import torch
import yaml
from e3nn.util.test import assert_equivariant

from searcher.data import DEMO_FIELDS, FIELD_KINDS, Field
from searcher.models import build_model, default_dtype, gate_function, random_graph

__all__ = ["assert_gate", "make_fields", "model_config", "random_graph", "seeded"]


@contextlib.contextmanager
def seeded(seed: int = 0):
    """Seed torch, numpy and random inside the block; torch's outer RNG state is restored."""
    with torch.random.fork_rng(devices=[]):
        torch.manual_seed(seed)
        np.random.seed(seed)
        random.seed(seed)
        yield


def model_config(overrides: dict | None = None) -> dict:
    """The ``model`` section of ``defaults.yaml`` with dotted overrides applied.

    Example:
        >>> model_config({"family": "gated", "hidden.lmax": 2})["hidden"]["lmax"]
        2
    """
    text = importlib.resources.files("searcher.spec").joinpath("defaults.yaml").read_text()
    cfg = yaml.safe_load(text)["model"]
    for key, value in (overrides or {}).items():
        *head, last = key.split(".")
        node = cfg
        for part in head:
            node = node[part]
        if last not in node:
            raise KeyError(f"model.{key} is not a key of defaults.yaml")
        node[last] = value
    return cfg


def make_fields(spec: dict[str, tuple[str, str, str]] | None = None) -> dict[str, Field]:
    """Fields from ``name → (kind, role, level)``; the demo's fields when ``spec`` is None."""
    if spec is None:
        return {f.name: f for f in DEMO_FIELDS}
    return {name: Field(name, kind, FIELD_KINDS[kind], role, level)
            for name, (kind, role, level) in spec.items()}


def assert_gate(model_or_cfg, fields: dict, target: str | None = None, *, seed: int = 0,
                tol: float = 1e-9, n: int = 12) -> dict:
    """Assert equivariance with e3nn's ``assert_equivariant`` in float64.

    Args:
        model_or_cfg: a built model, or a ``model`` section (built with ``seed``).
        fields: field name → Field.
        target: target field name (needed only with a config).
        seed: seed of the model (config only), the probe graph and the transforms.
        tol: the largest componentwise error allowed.
        n: nodes of the probe graph.

    Returns:
        e3nn's errors dict ``(parity_k, did_translate) → error``.
    """
    with seeded(seed), default_dtype(torch.float64):
        model = model_or_cfg if isinstance(model_or_cfg, torch.nn.Module) \
            else build_model(model_or_cfg, fields, target)
        model = copy.deepcopy(model).to(torch.float64)
        geometry = getattr(model, "geometry", None)
        cutoff = geometry.radial.cutoff if geometry is not None else 1.0
        graph = random_graph(fields, n, seed, radius=0.9 * cutoff, dtype=torch.float64)
        f, names, irreps_in, irreps_out = gate_function(model, fields, graph.graph_radius)
        args = [graph.pos] + [getattr(graph, name) for name in names]
        with torch.no_grad():
            return assert_equivariant(f, args_in=args, irreps_in=irreps_in,
                                      irreps_out=[irreps_out], tolerance=tol,
                                      do_parity=True, do_translation=True)
