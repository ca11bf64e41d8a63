"""Data layer: field kinds ↔ irreps, the analytic-flow demo, file readers, graphs, splits,
stress sets, normalisation and the on-disk cache.

Example:
    >>> import yaml, importlib.resources as r
    >>> text = r.files("searcher.spec").joinpath("defaults.yaml").read_text()
    >>> task = yaml.safe_load(text)["task"]
    >>> sorted(describe_fields(task))
    ['anisotropy', 'pressure', 'pressure_gradient', 'scaled_strain', 'scaled_vorticity',
     'strain_rate', 'velocity', 'vorticity']
"""
from searcher.data._closure import (closure_anisotropy, linear_anisotropy, make_realizable,
                                    pope_terms, strain_rotation, szl_anisotropy, time_scale)
from searcher.data._dataset import (GENERATOR_VERSION, Dataset, build_dataset, data_hash,
                                    describe_fields)
from searcher.data._demo import (DEMO_FIELDS, Placement, Sample, demo_sample, demo_samples,
                                 place_flow)
from searcher.data._files import SUFFIXES, data_cases, data_files, declared_fields, read_samples, write_npz
from searcher.data._flows import FAMILIES, draw_params, evaluate_flow
from searcher.data._graphs import (LongEdges, build_edges, check_cutoff, graph_stats,
                                   long_edge_counter, long_edges, to_data, warn_long_edges)
from searcher.data._kinds import (FIELD_KINDS, Field, irreps_dim, rotate_irreps, to_cartesian,
                                  to_irreps)
from searcher.data._normaliser import Normaliser
from searcher.data._splits import split_samples, stress_sets, transform_sample
from searcher.data._survey import survey_dataset

__all__ = [
    "DEMO_FIELDS", "Dataset", "LongEdges", "FAMILIES", "closure_anisotropy", "FIELD_KINDS", "Field", "GENERATOR_VERSION",
    "Normaliser", "Placement", "SUFFIXES", "Sample", "build_dataset",
    "build_edges", "check_cutoff", "data_cases", "data_files", "data_hash", "declared_fields", "demo_sample", "demo_samples",
    "describe_fields", "draw_params", "evaluate_flow", "graph_stats", "irreps_dim",
    "linear_anisotropy", "long_edge_counter", "long_edges", "make_realizable", "place_flow", "pope_terms", "read_samples",
    "rotate_irreps", "split_samples", "strain_rotation", "stress_sets", "survey_dataset",
    "szl_anisotropy",
    "time_scale", "to_cartesian", "to_data", "to_irreps", "transform_sample", "warn_long_edges",
    "write_npz",
]
