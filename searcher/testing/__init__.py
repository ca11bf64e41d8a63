"""Test helpers shared by the suite: the equivariance gate as an assertion, probe graphs,
seeding, the tiny study document the search tests write, and pruner replays over known
curves (the benchmark and the replay check every pruner passes build on them), and planted
synthetic studies in the store format.

``assert_gate`` wraps e3nn's ``assert_equivariant`` around the same rebuilt-graph function
the gate uses; ``random_graph`` is the models' probe-graph builder.
"""
from searcher.testing._broken import BrokenBias
from searcher.testing._helpers import assert_gate, make_fields, model_config, random_graph, seeded
from searcher.testing._planted import add_trial, planted_curves, planted_study
from searcher.testing._pruner_check import check_pruner_replay
from searcher.testing._replay import (ReplayResult, compare_pruners, crossing_curves,
                                      format_replay_table, good_mask, measure_call_cost, replay,
                                      replay_order, replay_pruners)
from searcher.testing._studies import tiny_fit_config, tiny_study_doc

__all__ = ["BrokenBias", "assert_gate", "make_fields", "model_config", "random_graph", "seeded",
           "tiny_fit_config", "tiny_study_doc", "check_pruner_replay", "add_trial",
           "planted_curves",
           "planted_study", "ReplayResult", "compare_pruners",
           "crossing_curves", "format_replay_table", "good_mask", "measure_call_cost", "replay",
           "replay_order", "replay_pruners"]
