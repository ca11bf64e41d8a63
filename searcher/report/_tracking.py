"""Record dossier re-runs in MLflow as child runs of the study's parent run.

Each re-run gets tags ``searcher.role = dossier-rerun``, ``searcher.study``,
``searcher.finalist`` and ``searcher.seed``, its configuration as params, and its measured
numbers as metrics; the validation curve is logged per epoch (step = epoch).
"""
from __future__ import annotations

import math
import time

__all__ = ["DossierTracker", "RERUN_ROLE"]

RERUN_ROLE = "dossier-rerun"


def _flat(cfg: dict, prefix: str = "") -> dict[str, str]:
    out = {}
    for key, value in cfg.items():
        if isinstance(value, dict):
            out.update(_flat(value, f"{prefix}{key}."))
        else:
            out[f"{prefix}{key}"] = str(value)[:500]  # MLflow caps param values
    return out


class DossierTracker:
    """Opens one child run per re-run under the study's parent run.

    Args:
        study: the :class:`searcher.spec.Study`.
        uri: MLflow tracking URI.

    Attributes:
        parent: parent run id, or None when the tracker holds no run of this study (the
            re-runs then go to the study's experiment on their own; ``note`` says so).
    """

    def __init__(self, study, uri: str) -> None:
        from mlflow.tracking import MlflowClient

        from searcher.analysis import find_parent_run

        self.study, self.uri = study, uri
        self.client = MlflowClient(tracking_uri=uri)
        self.parent = find_parent_run(uri, study.name)
        if self.parent:
            self.experiment = self.client.get_run(self.parent).info.experiment_id
            self.note = ""
        else:
            name = study.raw.get("tracking", {}).get("experiment") or study.name
            found = self.client.get_experiment_by_name(name)
            self.experiment = found.experiment_id if found else self.client.create_experiment(name)
            self.note = (f"No parent run of study {study.name!r} in {uri}: the dossier re-runs "
                         "are recorded in its experiment without a parent.")

    def record(self, label: str, config: dict, rec: dict) -> str:
        """Log one re-run; returns its run id."""
        from mlflow.entities import Metric, Param, RunTag

        from searcher.search import public_config

        tags = {"searcher.role": RERUN_ROLE, "searcher.study": self.study.name,
                "searcher.finalist": label, "searcher.seed": str(rec["seed"])}
        if self.parent:
            tags["mlflow.parentRunId"] = self.parent
        run = self.client.create_run(self.experiment, run_name=f"dossier {label} seed {rec['seed']}",
                                     tags=tags)
        rid = run.info.run_id
        values = {"test_error": rec["error"], "best_value": rec["best_value"],
                  "cpu_seconds": rec["cpu_seconds"],
                  "equivariance_error": rec["equivariance_error"],
                  "inference_ms_per_1k_nodes": rec["inference_ms_per_1k_nodes"]}
        values.update({f"test/{b}": v for b, v in rec["test"].items()})
        values.update({f"stress/{n}/ratio": v["ratio"] for n, v in rec["stress"].items()})
        now = int(time.time() * 1000)
        metrics = [Metric(k, float(v), now, 0) for k, v in values.items()
                   if v is not None and math.isfinite(v)]
        metrics += [Metric("val_loss", float(v), now, step)
                    for step, v in enumerate(rec["curve"], start=1) if math.isfinite(v)]
        params = [Param(k, v) for k, v in _flat(public_config(config)).items()]
        for start in range(0, max(len(params), len(metrics)), 100):  # log_batch limits
            self.client.log_batch(rid, metrics=metrics[start:start + 100],
                                  params=params[start:start + 100],
                                  tags=[RunTag("searcher.status", rec["status"])] if start == 0 else [])
        self.client.set_terminated(rid, "FINISHED" if rec["status"] == "completed" else "FAILED")
        return rid
