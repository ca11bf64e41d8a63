"""Reading finished studies: curve groups, traits, importance, prune audit, comparison.

Analysis reads only what the Optuna store (and MLflow) hold; the prune audit is the one
place that trains, through the search layer's ``rerun_config``.

Public API: :func:`group_curves`, :func:`analyze`, :func:`expected_best`, :func:`compare`,
plus the pieces they are built from.
"""
from searcher.analysis._analyze import MIN_TRIALS, SAFETY, analyze, find_parent_run
from searcher.analysis._audit import choose_for_audit, classify_reruns, prune_audit
from searcher.analysis._compare import compare
from searcher.analysis._curves import (FEATURES, GOOD_GAP_DECADES, GOOD_LABEL, LOWEST_LABEL,
                                       CurveGroups,
                                       curve_features, find_groups, group_curves)
from searcher.analysis._expected import (bootstrap_band, expected_best, expected_best_curve,
                                         trials_to_hit, wilson_interval)
from searcher.analysis._importance import importances
from searcher.analysis._json import dumps
from searcher.analysis._records import OUTCOMES, TrialRecord, count_outcomes, read_trials
from searcher.analysis._space import check_comparable, comparability_problems, space_diff
from searcher.analysis._traits import enrichment, param_kinds, trait_rules

__all__ = ["group_curves", "find_groups", "curve_features", "CurveGroups", "FEATURES",
           "GOOD_LABEL", "LOWEST_LABEL", "GOOD_GAP_DECADES", "analyze", "find_parent_run", "MIN_TRIALS",
           "SAFETY", "expected_best", "expected_best_curve", "bootstrap_band",
           "wilson_interval", "trials_to_hit", "compare", "space_diff",
           "comparability_problems", "check_comparable", "enrichment", "trait_rules",
           "param_kinds", "importances", "choose_for_audit", "classify_reruns",
           "prune_audit", "read_trials", "count_outcomes", "TrialRecord", "OUTCOMES", "dumps"]
