"""Re-train one candidate with one seed at full fidelity and measure everything the dossier
shows: test error per irrep block, every stress set, the equivariance gate on the trained
weights, size and cost, inference time and training CPU time.
"""
from __future__ import annotations

import copy
import math
import time
import warnings

__all__ = ["ERROR_DEFINITION", "CASE_DEFINITION", "case_rows", "headline_error",
           "inference_ms_per_1k_nodes", "measure", "retrain"]

TIMING_REPEATS = 3
# What the dossier's "test error" and the search's "loss" are, and how they relate.
ERROR_DEFINITION = (
    "Test error: for each irrep block of the target (one copy of one irrep, e.g. the five "
    "2e components of a traceless tensor), the relative L2 error ‖pred − true‖ / ‖true‖ "
    "over the test nodes, then the mean over the blocks; a block whose true values are near "
    "zero is reported as an RMS and left out of the mean.  Search loss and val loss: the "
    "normalised MSE, i.e. the squared error of every target component divided by its "
    "block's training scale² (the block's RMS norm over the training nodes), averaged over "
    "components.  For a one-block target whose test values have the training RMS, "
    "normalised MSE ≈ (relative L2)² (derived).  On patched data (task.patches) only core "
    "nodes count: halo nodes pass messages and carry no error.")
CASE_DEFINITION = (
    "Error per case: the test error over the nodes of one case (a file, or a sub-folder of "
    "files) in the test split or held out (unseen_family).  A case cut into patches is put "
    "back together from its patches' core nodes, keyed by each node's index in its file, so "
    "every node counts exactly once; with task.split.by: sample a case may have only some "
    "of its patches in the test split, and its row counts those nodes.")


def headline_error(metrics: dict) -> float:
    """One number per evaluation: mean relative L2 over the target's irrep blocks.

    Blocks measured as RMS (a near-zero block such as the trace of a traceless tensor) have
    no relative error and are left out; with none left, the normalised MSE stands in.

    Args:
        metrics: ``searcher.train.evaluate`` output.
    """
    rel = [v for k, v in metrics.items() if k.startswith("rel_l2/")
           and metrics.get("measure/" + k.split("/", 1)[1]) == "rel_l2"]
    return float(sum(rel) / len(rel)) if rel else float(metrics["loss"])


def case_rows(model, dataset) -> dict:
    """Error of every test and held-out case (:data:`CASE_DEFINITION`).

    Returns:
        case → ``{"part": "test" | "unseen_family", "nodes", "files", "error"}``.
    """
    from searcher.train import case_errors

    parts = {"test": [dataset.graphs[i] for i in dataset.split["test"]],
             "unseen_family": dataset.stress.get("unseen_family", [])}
    out = {}
    for part, graphs in parts.items():
        for case, m in (case_errors(model, graphs, dataset) if graphs else {}).items():
            out[case] = {"part": part, "nodes": m["nodes"], "files": m["files"],
                         "error": headline_error(m)}
    return dict(sorted(out.items()))


def inference_ms_per_1k_nodes(model, graphs) -> float:
    """Forward time of ``model`` over ``graphs`` in milliseconds per 1,000 nodes (best of 3).

    Informative only: it depends on the machine and its load.
    """
    import torch

    from searcher.train import collate

    device = next(iter(model.parameters()), torch.empty(0)).device
    batches = collate(model, graphs, 32, device=device)
    nodes = sum(g.num_nodes for g in graphs)
    model.eval()
    best = math.inf
    with torch.no_grad():
        for _ in range(TIMING_REPEATS):
            if device.type == "cuda":
                torch.cuda.synchronize()
            start = time.perf_counter()
            for batch in batches:
                model(batch)
            if device.type == "cuda":
                torch.cuda.synchronize()
            best = min(best, time.perf_counter() - start)
    return 1e6 * best / max(nodes, 1)


def measure(model, dataset, *, seed: int) -> dict:
    """Evaluate a trained ``model`` on the test split, every stress set and the gate.

    Returns:
        ``error``, ``test`` (block → error), ``stress`` (name → {error, ratio}),
        ``cases`` (:func:`case_rows`), ``equivariance_error``, ``gate_passed``, ``gate_reason``, ``cost`` and
        ``inference_ms_per_1k_nodes``.
    """
    from searcher.data import graph_stats
    from searcher.models import estimate_cost, gate_model
    from searcher.train import evaluate

    test_graphs = [dataset.graphs[i] for i in dataset.split["test"]]
    test = evaluate(model, test_graphs, dataset)
    error = headline_error(test)
    stress = {}
    for name, graphs in dataset.stress.items():
        if graphs:
            e = headline_error(evaluate(model, graphs, dataset))
            stress[name] = {"error": e, "ratio": e / error if error > 0 else math.nan}
    # The gate measures the trained weights (on CPU, in float64), not a fresh initialisation;
    # the cost model times its step on CPU batches too.
    on_cpu = copy.deepcopy(model).cpu()
    gate = gate_model(on_cpu, dataset.fields, seed=seed)
    with warnings.catch_warnings():  # isolated nodes were already warned about at build time
        warnings.simplefilter("ignore", UserWarning)
        per_epoch = graph_stats([dataset.graphs[i] for i in dataset.split["train"]])
    return {
        "error": error,
        "test": {k.split("/", 1)[1]: v for k, v in test.items() if k.startswith("rel_l2/")},
        "stress": stress,
        "cases": case_rows(model, dataset),
        "equivariance_error": float(gate.equivariance_error),
        "gate_passed": bool(gate.passed),
        "gate_reason": gate.reason,
        "cost": estimate_cost(on_cpu, per_epoch).to_dict(),
        "inference_ms_per_1k_nodes": inference_ms_per_1k_nodes(model, test_graphs),
    }


def retrain(study, config: dict, *, seed: int, epochs: int) -> tuple[dict, object, object]:
    """Train ``config`` with ``seed`` for ``epochs`` on the full training set and measure it.

    ``training.device`` is set to ``auto``, so a GPU is used where present.

    Returns:
        ``(record, model, dataset)``: the per-seed record of the dossier (see
        :mod:`searcher.report._content`; ``cost`` kept for the finalist), the trained model
        (best epoch's weights) and its dataset.
    """
    from searcher.search import train_config

    config = copy.deepcopy(config)
    config["training"]["device"] = "auto"
    model, result, dataset = train_config(study, config, seed=seed, epochs=epochs,
                                          full_fidelity=True)
    record = {"seed": seed, "status": result.status, "reason": result.reason,
              "epochs": result.epochs, "best_value": float(result.best_value),
              "best_epoch": result.best_epoch, "cpu_seconds": float(result.cpu_seconds),
              "curve": [float(v) for v in result.curve]}
    record.update(measure(model, dataset, seed=seed))
    return record, model, dataset
