"""Assemble the dossier content from per-seed re-run records (pure: no training here).

A finalist record as produced by the re-runs::

    {"label": "F1", "role": "finalist" | "control", "origin": "trial 7", "trial": 7,
     "search_value": 0.21, "config": {...}, "config_hash": "...", "equivariant": True,
     "cost": {"params": ..., "madds_per_node": ...},
     "seeds": [{"seed", "status", "reason", "epochs", "best_value", "best_epoch", "error",
                "test": {block: error}, "stress": {name: {"error", "ratio"}},
                "cases": {case: {"part", "nodes", "files", "error"}},
                "equivariance_error", "gate_passed", "cpu_seconds",
                "inference_ms_per_1k_nodes", "curve", "mlflow_run_id"}]}

:func:`assemble` adds ``metrics`` / ``stress`` intervals per finalist, then the head-to-head,
rank stability, fidelity transfer, the pick and the cautions.
"""
from __future__ import annotations

import math

import numpy as np

from searcher.report._cautions import cautions_for
from searcher.report._finalist_measure import CASE_DEFINITION, ERROR_DEFINITION
from searcher.report._front import cost_front
from searcher.report._pick import decide
from searcher.report._pick import judge_against_baselines
from searcher.report._references import skill_scores
from searcher.report._stats import rank_stability, seed_interval, transfer

__all__ = ["FORMAT", "assemble", "summarise_finalist"]

FORMAT = "searcher-dossier/1"
SEED_METRICS = ("error", "best_value", "cpu_seconds", "inference_ms_per_1k_nodes")


def summarise_finalist(fin: dict, *, confidence: float = 0.95, seed: int = 0) -> dict:
    """Add ``metrics`` (intervals over seeds), ``stress``, ``cases`` and
    ``equivariance_error``."""
    seeds = fin["seeds"]

    def iv(values):
        return seed_interval(values, confidence=confidence, seed=seed).to_dict()

    metrics = {key: iv([s[key] for s in seeds]) for key in SEED_METRICS}
    blocks = sorted({b for s in seeds for b in s["test"]})
    metrics.update({f"test/{b}": iv([s["test"].get(b, math.nan) for s in seeds]) for b in blocks})
    names = sorted({n for s in seeds for n in s["stress"]})
    stress = {n: {part: iv([s["stress"].get(n, {}).get(part, math.nan) for s in seeds])
                  for part in ("error", "ratio")} for n in names}
    rows = {c: r for s in seeds for c, r in s.get("cases", {}).items()}
    cases = {c: {"part": r["part"], "nodes": r["nodes"], "files": r["files"],
                 "error": iv([s.get("cases", {}).get(c, {}).get("error", math.nan)
                              for s in seeds])} for c, r in sorted(rows.items())}
    errors = [s["equivariance_error"] for s in seeds if math.isfinite(s["equivariance_error"])]
    return {**fin, "metrics": metrics, "stress": stress, "cases": cases,
            "equivariance_error": max(errors) if errors else math.nan}


def _score_matrix(finalists: list[dict]) -> np.ndarray:
    """``[seeds, finalists]`` test errors on the seeds every finalist ran."""
    by_seed = [{s["seed"]: s["error"] for s in f["seeds"]} for f in finalists]
    common = sorted(set.intersection(*(set(d) for d in by_seed))) if by_seed else []
    return np.array([[d[s] for d in by_seed] for s in common], dtype=float).reshape(
        len(common), len(finalists))


def assemble(*, study: dict, settings: dict, finalists: list[dict], provenance: dict,
             files: dict, warnings: list[str] | None = None, seed: int = 0,
             baselines: list[dict] | None = None, learned: list[dict] | None = None,
             trials: list[dict] | None = None) -> dict:
    """The whole dossier content (what the JSON file holds).

    Args:
        study: ``name``, ``summary``, ``team``, ``path``, ``hash``.
        settings: ``finalists``, ``seeds``, ``epochs``, ``quick``, ``device``, ``confidence``.
        finalists: re-run records (see module doc); the control last.
        provenance: from :func:`searcher.report.provenance`.
        files: what is written where (names relative to the dossier folder).
        warnings: notes from choosing and re-training the finalists.
        seed: seeds every bootstrap.
        baselines: reference predictors scored on the same splits
            (:func:`searcher.report._references.score_references`, and learned references'
            rows from :func:`searcher.report._references.learned_row`).
        learned: the learned references' re-run records (kept with their seeds).
        trials: completed trials' cost points (:func:`searcher.report._front.time_trials`).
    """
    summed = [summarise_finalist(f, confidence=settings["confidence"], seed=seed)
              for f in finalists]
    baselines = list(baselines or [])
    for f in summed:
        f["skill"] = skill_scores(f["metrics"]["error"]["mean"], baselines)
    references = [summarise_finalist(f, confidence=settings["confidence"], seed=seed)
                  for f in (learned or [])]
    pick, duel = decide(summed, seed=seed)
    judge_against_baselines(pick, summed, baselines, references, seed=seed)
    control = next((f for f in summed if f["role"] == "control"), None)
    content = {
        "format": FORMAT,
        "study": study,
        "settings": settings,
        "finalists": summed,
        "p_a_beats_b": duel.to_dict() if duel else None,
        "rank_stability": rank_stability(_score_matrix(summed)).to_dict(),
        "fidelity_transfer": transfer(
            [f.get("search_value") if f.get("search_value") is not None else math.nan
             for f in summed],
            [f["metrics"]["error"]["mean"] for f in summed]).to_dict(),
        "pick": pick,
        "baselines": baselines,
        "references": references,
        "error_definition": ERROR_DEFINITION,
        "case_definition": CASE_DEFINITION,
        "control": ({"label": control["label"], "origin": control["origin"],
                     "config": control["config"], "params": control["cost"].get("params"),
                     "augment": control["config"]["model"].get("augment", "none")}
                    if control else None),
        "cost_front": cost_front(summed + references, list(trials or [])),
        "warnings": list(warnings or []),
        "provenance": provenance,
        "files": files,
    }
    content["cautions"] = cautions_for(content) + content["warnings"]
    return content
