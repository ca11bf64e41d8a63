"""Record dossier re-runs in MLflow as child runs of the study's parent run.

Uses the search layer's :class:`searcher.search.Tracker` (lock retries, never raises).  Each
re-run gets tags ``searcher.role = dossier-rerun``, ``searcher.finalist`` and
``searcher.seed``, its configuration as params, the validation curve per epoch
(step = epoch) and its measured numbers at step 0.
"""
from __future__ import annotations

import math
from pathlib import Path

__all__ = ["DossierTracker", "RERUN_ROLE"]

RERUN_ROLE = "dossier-rerun"


class DossierTracker:
    """One child run per re-run under the study's parent run.

    Args:
        study: the :class:`searcher.spec.Study`.

    Attributes:
        note: plain words when tracking is off (the dossier files still hold everything).
    """

    def __init__(self, study) -> None:
        from searcher.search import Tracker, prepare_tracking

        info = prepare_tracking(study, study.fixed(), Path(study.output_dir))
        self.tracker = Tracker(info)
        self.note = "" if self.tracker.on else (
            "MLflow tracking is unreachable: the re-runs are recorded in the dossier files only.")

    def record(self, label: str, config: dict, rec: dict) -> str:
        """Log one re-run record (see :mod:`searcher.report._content`); returns its run id."""
        t = self.tracker
        run_id = t.start_run(f"dossier-{label}-seed{rec['seed']}",
                             {"searcher.role": RERUN_ROLE, "searcher.finalist": label,
                              "searcher.seed": str(rec["seed"])}, config)
        values = {"test_error": rec["error"], "best_value": rec["best_value"],
                  "cpu_seconds": rec["cpu_seconds"],
                  "equivariance_error": rec["equivariance_error"],
                  "inference_ms_per_1k_nodes": rec["inference_ms_per_1k_nodes"],
                  **{f"test/{b}": v for b, v in rec["test"].items()},
                  **{f"stress/{n}/ratio": v["ratio"] for n, v in rec["stress"].items()}}
        rows = [(0, {k: v for k, v in values.items() if math.isfinite(v)})]
        rows += [(epoch, {"val_loss": v}) for epoch, v in enumerate(rec["curve"], start=1)
                 if math.isfinite(v)]
        outcome = rec["status"] if rec["status"] in ("diverged", "timeout") else "completed"
        t.finish(run_id, outcome=outcome, reason=rec["reason"], config=config, rows=rows)
        return run_id
