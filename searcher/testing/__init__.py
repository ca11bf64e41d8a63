"""Test helpers shared by the suite: the equivariance gate as an assertion, probe graphs,
seeding, and the tiny study document the search tests write.

``assert_gate`` wraps e3nn's ``assert_equivariant`` around the same rebuilt-graph function
the gate uses; ``random_graph`` is the models' probe-graph builder.
"""
from searcher.testing._helpers import assert_gate, make_fields, model_config, random_graph, seeded
from searcher.testing._studies import tiny_fit_config, tiny_study_doc

__all__ = ["assert_gate", "make_fields", "model_config", "random_graph", "seeded",
           "tiny_fit_config", "tiny_study_doc"]
