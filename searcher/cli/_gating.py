"""Candidate gating for ``searcher check --gate``: gate, cost and the guard, before any search.

It lives in the CLI layer because it builds what a search would build (the dataset for file
sources, the models) from a loaded study, crossing data, models and the search's guard rule
(:func:`searcher.search.guard_check`); the models layer itself only needs field descriptions.
"""
from __future__ import annotations

import math

__all__ = ["gate_samples", "demo_stats"]


def demo_stats(task: dict) -> dict:
    """Graph sizes of a demo task's training epoch, estimated without generating data.

    Probes per sample and the graph rule decide; the radius rule counts the expected
    neighbours in a ball inside the probe cube, ignoring the cube's faces (an overestimate
    near the boundary).
    """
    demo, graph = task["demo"], task["graph"]
    nodes = int(task["fidelity"]["probes"] or demo["probes"])
    if graph["rule"] == "neighbours":
        degree = float(graph["neighbours"])
    else:
        ball = 4 / 3 * math.pi * float(graph["radius"]) ** 3
        degree = (nodes - 1) * ball / (2 * float(demo["region"])) ** 3
    degree = min(degree, nodes - 1, graph["edge_cap"] or nodes)
    graphs = round(demo["samples"] * task["split"]["fractions"][0]
                   * task["fidelity"]["train_fraction"])
    return {"graphs": max(1, graphs), "nodes_mean": nodes, "edges_mean": nodes * degree,
            "degree_mean": degree}


def _file_stats(study, task: dict) -> dict:
    from searcher.data import build_dataset, graph_stats

    ds = build_dataset(task, cache_dir=study.output_dir / "cache")
    stats = graph_stats([ds.graphs[i] for i in ds.split["train"]])
    stats["graphs"] = max(1, round(stats["graphs"] * task["fidelity"]["train_fraction"]))
    # a from_data cutoff reads the whole dataset's longest edge, as the trials do
    stats.update({k: ds.stats["graphs"][k] for k in ("edge_len_max", "local_len_max")})
    return stats


def _demo_edges(study, task: dict) -> dict:
    """The demo dataset's longest edges (generated, as a from_data cutoff needs them)."""
    from searcher.data import build_dataset

    graphs = build_dataset(task, cache_dir=study.output_dir / "cache").stats["graphs"]
    return {k: graphs[k] for k in ("edge_len_max", "local_len_max")}


def _trial_seconds(cfg: dict, stats: dict, step_ms) -> float | None:
    # one step per batch, every epoch of the trial: what training.time_limit bounds
    if step_ms is None:
        return None
    steps = math.ceil(stats["graphs"] / int(cfg["training"]["batch_size"]))
    return step_ms * steps * int(cfg["training"]["epochs"]) / 1e3


def gate_samples(study, configs: list[dict]) -> list[dict]:
    """Gate, cost and guard verdict of each resolved config.

    Returns one dict per config with ``params, equivariant, equivariance_error,
    equivariance_error_f32, second_check_error, passed, reason, madds_per_epoch,
    madds_per_edge, madds_per_node, step_ms``, the estimated ``trial_seconds`` (steps per
    epoch x epochs x ``step_ms``), ``guard`` (``search.guard`` and ``training.time_limit``)
    and ``within_guard`` (False when ``run`` would reject the trial for its size; the reasons,
    and a trial that would run into the time limit, are added to ``reason``); a config whose model cannot be built is recorded as
    not passed with the problem as its reason.
    """
    from searcher.data import describe_fields
    from searcher.errors import UserError
    from searcher.models import build_model, estimate_cost, run_gate
    from searcher.options import DATA_DERIVED
    from searcher.search import guard_check

    out = []
    for cfg in configs:
        task = cfg["task"]
        fields = describe_fields(task)
        target = next(f.name for f in fields.values() if f.role == "target")
        stats = demo_stats(task) if task["source"] == "demo" else _file_stats(study, task)
        if task["source"] == "demo" and cfg["model"]["radial"]["cutoff"] == DATA_DERIVED[
                "model.radial.cutoff"]:
            stats.update(_demo_edges(study, task))
        guard = {**cfg["search"]["guard"], "time_limit": cfg["training"]["time_limit"]}
        try:
            gate = run_gate(cfg["model"], fields, target, seed=int(cfg["training"]["seed"]),
                            stats=stats)
            model = build_model(cfg["model"], fields, target, stats=stats)
        except UserError as exc:
            out.append({"params": None, "equivariant": None, "equivariance_error": None,
                        "equivariance_error_f32": None, "second_check_error": None,
                        "passed": False, "reason": str(exc), "madds_per_epoch": None,
                        "madds_per_edge": None, "madds_per_node": None, "step_ms": None,
                        "trial_seconds": None, "guard": guard, "within_guard": None})
            continue
        cost = estimate_cost(model, stats, batch_size=int(cfg["training"]["batch_size"]))
        row = {**gate.to_dict(), **cost.to_dict()}
        row["trial_seconds"] = _trial_seconds(cfg, stats, row["step_ms"])
        _, over = guard_check(cfg["search"]["guard"], row["params"], row["madds_per_epoch"])
        row.update(guard=guard, within_guard=not over)
        if row["trial_seconds"] is not None and row["trial_seconds"] > guard["time_limit"]:
            over.append(f"about {row['trial_seconds']:.3g} s of training would run into "
                        f"training.time_limit {guard['time_limit']:g} s")
        if over:
            row["reason"] = "; ".join(filter(None, [row.get("reason", ""), *over]))
        out.append(row)
    return out
