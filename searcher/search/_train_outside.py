"""Training one resolved config outside the search (prune audit, dossier finalists, bench)."""
from __future__ import annotations

import copy
import json
import math
import warnings
from pathlib import Path

__all__ = ["train_config", "rerun_config", "study_dataset"]

_DATASETS: dict = {}


def study_dataset(study, task: dict):
    """The dataset of ``task`` from the study's cache (built once per process)."""
    from searcher.data import build_dataset

    cache = Path(study.output_dir) / "cache"
    key = (str(cache.resolve()), json.dumps(task, sort_keys=True, default=str))
    if key not in _DATASETS:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            _DATASETS[key] = build_dataset(task, cache_dir=cache)
    return _DATASETS[key]


def train_config(study, config: dict, *, seed: int, epochs: int | None = None,
                 full_fidelity: bool = False, callback=None):
    """Train one resolved config.

    Args:
        study: the loaded study (for its output folder / dataset cache).
        config: a resolved config (e.g. a trial's ``config`` attribute).
        seed: training seed (model initialisation and batch order).
        epochs: epochs to train (default ``training.epochs``).
        full_fidelity: ignore ``task.fidelity`` (every training graph and probe).
        callback: optional ``callback(epoch, metrics) -> bool`` as in ``fit``.

    Returns:
        ``(model, FitResult, dataset)``; the model holds its best epoch's weights.
    """
    import torch

    from searcher.models import build_model
    from searcher.train import fit

    cfg = copy.deepcopy(config)
    cfg["training"]["seed"] = int(seed)
    if epochs is not None:
        cfg["training"]["epochs"] = int(epochs)
    dataset = study_dataset(study, cfg["task"])
    torch.manual_seed(int(seed))
    model = build_model(cfg["model"], dataset.fields, dataset.target.name,
                        stats=dataset.stats["graphs"])
    result = fit(model, dataset, cfg, callback=callback, full_fidelity=full_fidelity)
    return model, result, dataset


def rerun_config(study, config: dict, tag: str) -> dict:
    """Re-train ``config`` to its full epoch budget with its own seed, logged to MLflow.

    The run is a child of the study's parent run with tags ``searcher.role=rerun`` and
    ``searcher.tag=<tag>``.

    Returns:
        ``{"curve": [val loss per epoch], "best_value", "outcome" (completed | diverged |
        timeout), "epochs", "mlflow_run_id"}``.
    """
    from ._tracking import Tracker, prepare_tracking

    tracker = Tracker(prepare_tracking(study, study.fixed(), Path(study.output_dir)))
    run_id = tracker.start_run(f"rerun-{tag}", {"searcher.role": "rerun",
                                                "searcher.tag": str(tag)}, config)
    rows: list = []

    def keep(epoch: int, metrics: dict) -> bool:
        rows.append((epoch, dict(metrics)))
        return False

    _, result, _ = train_config(study, config, seed=int(config["training"]["seed"]),
                                callback=keep)
    outcome = result.status if result.status in ("diverged", "timeout") else "completed"
    tracker.finish(run_id, outcome=outcome, reason=result.reason, config=config, rows=rows)
    best = result.best_value if math.isfinite(result.best_value) else None
    return {"curve": list(result.curve), "best_value": best, "outcome": outcome,
            "epochs": result.epochs, "mlflow_run_id": run_id}
