"""Models: irreps helpers, radial bases, attributes, blocks, families, gate, cost model.

Public API (DEVELOPERS.md, "Contracts/models"): :func:`build_model`, :func:`run_gate`
(:class:`GateResult`), :func:`estimate_cost` (:class:`Cost`); plus
the registries (:data:`FAMILIES`, :data:`RADIAL_BASES`, :data:`ENVELOPES`,
:data:`ACTIVATIONS`), :func:`attach_geometry` for cached edge geometry and
:func:`random_graph` for probe graphs.
"""
from searcher.models._base import FAMILIES, FieldModel
from searcher.models._build import build_model
from searcher.models._cost import Cost, count_madds, estimate_cost
from searcher.models._cutoff import CUTOFF_MARGIN, resolve_cutoff
from searcher.models._build_cache import clear as clear_build_cache
from searcher.models._gate import (GateResult, default_dtype, forget_verdicts, gate_function,
                                   gate_model, run_gate)
from searcher.models._geometry import EdgeContext, Geometry, attach_geometry
from searcher.models._irreps import hidden_irreps, unreachable_irreps
from searcher.models._probe import graph_from, radius_edges, random_graph
from searcher.models._radial import ENVELOPES, RADIAL_BASES, RadialEmbedding
from searcher.models._registry import ACTIVATIONS, Registry

__all__ = [
    "ACTIVATIONS", "CUTOFF_MARGIN", "Cost", "ENVELOPES", "EdgeContext", "FAMILIES", "FieldModel", "GateResult",
    "Geometry", "RADIAL_BASES", "RadialEmbedding", "Registry", "attach_geometry",
    "build_model", "clear_caches", "count_madds", "default_dtype", "estimate_cost", "gate_function", "gate_model",
    "graph_from", "hidden_irreps", "radius_edges", "random_graph", "resolve_cutoff", "run_gate",
    "unreachable_irreps",
]


def clear_caches() -> None:
    """Forget the per-process build caches and gate verdicts: the next build and gate of
    every architecture runs cold, as in a fresh worker process."""
    clear_build_cache()
    forget_verdicts()
