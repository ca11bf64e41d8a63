"""Accuracy against cost: the points of the dossier's cost front and their Pareto flags.

A production pick trades error against inference cost.  Two groups of points are drawn,
each with the error it was measured with:

* ``dossier``: every re-trained candidate (finalists, control, learned references): mean test
  error over seeds, mean measured inference time, multiply-adds per node;
* ``search``: every completed trial: its search-time best validation loss, and the inference
  time of its architecture measured here on the dossier's test graphs (untrained weights:
  time does not depend on their values), with its multiply-adds per node.

A point is on the front (``pareto``) when no point of its own group is at least as good in
error, time and multiply-adds and better in one (the usual definition of Pareto dominance).
"""
from __future__ import annotations

import math
import warnings

__all__ = ["pareto_flags", "cost_front", "time_trials"]

AXES = ("error", "ms_per_1000_nodes", "madds")


def _dominates(a: dict, b: dict) -> bool:
    pairs = [(a[k], b[k]) for k in AXES]
    return all(x <= y for x, y in pairs) and any(x < y for x, y in pairs)


def pareto_flags(points: list[dict]) -> list[bool]:
    """For each point, whether no other point dominates it (points with a missing or
    non-finite axis are never on the front)."""
    ok = [all(p.get(k) is not None and math.isfinite(p[k]) for k in AXES) for p in points]
    return [bool(ok[i]) and not any(ok[j] and _dominates(points[j], points[i])
                                    for j in range(len(points)) if j != i)
            for i in range(len(points))]


def time_trials(records, dataset) -> list[dict]:
    """Inference time and multiply-adds of every completed trial's architecture.

    Returns:
        ``[{trial, error (search best value), ms_per_1000_nodes, madds}]``; trials whose
        model cannot be built here are left out.
    """
    from searcher.data import graph_stats
    from searcher.errors import UserError
    from searcher.models import build_model, estimate_cost
    from searcher.report._finalist_measure import inference_ms_per_1k_nodes

    test = [dataset.graphs[i] for i in dataset.split["test"]]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        stats = graph_stats([dataset.graphs[i] for i in dataset.split["train"]])
    out = []
    for r in records:
        if r.outcome != "completed" or not r.config or not math.isfinite(r.best_value):
            continue
        try:
            model = build_model(r.config["model"], dataset.fields, dataset.target.name,
                                stats=stats)
        except (UserError, RuntimeError, ValueError):
            continue
        out.append({"trial": r.number, "error": float(r.best_value),
                    "ms_per_1000_nodes": inference_ms_per_1k_nodes(model, test),
                    "madds": float(estimate_cost(model, stats, repeats=0).madds_per_node)})
    return out


def cost_front(candidates: list[dict], trials: list[dict]) -> list[dict]:
    """The ``cost_front`` of the dossier.

    Args:
        candidates: re-trained candidates as summarised (``label``, ``metrics``, ``cost``).
        trials: from :func:`time_trials`.

    Returns:
        ``[{label or trial, group, error, ms_per_1000_nodes, madds, pareto}]``.
    """
    dossier = [{"label": c["label"], "group": "dossier",
                "error": c["metrics"]["error"]["mean"],
                "ms_per_1000_nodes": c["metrics"]["inference_ms_per_1k_nodes"]["mean"],
                "madds": float(c["cost"].get("madds_per_node") or math.nan)}
               for c in candidates]
    search = [{**t, "group": "search"} for t in trials]
    for group in (dossier, search):
        for p, flag in zip(group, pareto_flags(group)):
            p["pareto"] = flag
    return dossier + search
