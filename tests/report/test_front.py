"""Pareto flags of the cost front, on points whose front is known by hand."""
from __future__ import annotations

import math

from searcher.report._front import cost_front, pareto_flags


def _p(error, ms, madds):
    return {"error": error, "ms_per_1000_nodes": ms, "madds": madds}


def test_front_by_hand():
    # derived: B is beaten by A in every axis; C is the cheapest; D the most accurate;
    # E ties A exactly (neither dominates the other); F lacks a time and never counts.
    pts = [_p(0.2, 2.0, 100), _p(0.3, 3.0, 200), _p(0.5, 1.0, 50), _p(0.1, 5.0, 400),
           _p(0.2, 2.0, 100), _p(0.05, math.nan, 10)]
    assert pareto_flags(pts) == [True, False, True, True, True, False]
    assert pareto_flags([]) == []


def test_groups_are_judged_apart():
    fin = {"label": "F1", "metrics": {"error": {"mean": 0.9},
                                      "inference_ms_per_1k_nodes": {"mean": 9.0}},
           "cost": {"madds_per_node": 900}}
    trials = [{"trial": 3, "error": 0.01, "ms_per_1000_nodes": 1.0, "madds": 10.0},
              {"trial": 4, "error": 0.02, "ms_per_1000_nodes": 2.0, "madds": 20.0}]
    front = cost_front([fin], trials)
    # F1 is worse than both trials on every axis but is alone in its group (other measure).
    assert [(p.get("label", p.get("trial")), p["group"], p["pareto"]) for p in front] == \
        [("F1", "dossier", True), (3, "search", True), (4, "search", False)]
