"""``study_status``: where a study stands, read from its store (nothing is trained)."""
from __future__ import annotations

from pathlib import Path

import optuna

__all__ = ["study_status"]


def study_status(study, storage: str | None = None, *, out: str | Path | None = None) -> dict:
    """Counts by outcome and by Optuna state, the best trial, CPU time and locations.

    Args:
        study: a loaded study.
        storage: storage URL overriding ``search.storage``.
        out: output folder overriding the study's.

    Returns:
        ``{"study", "storage" (password masked), "output_dir", "stored" (False when the store
        holds no such study: it never ran), "n_trials", "counts" (outcome
        → int, plus running/waiting), "states" (Optuna state name → int), "best" ({number,
        value, config} or None), "cpu_seconds"}``.
    """
    from searcher.outcomes import best_record, tally
    from ._store import read_store, storage_label

    if out is not None:
        study.output_dir = Path(out)
    label = storage_label(study, storage)
    opt = read_store(study, storage, required=False)  # a study not run yet has no trials
    trials = opt.get_trials() if opt is not None else []
    states = {s.name: 0 for s in optuna.trial.TrialState}
    for t in trials:
        states[t.state.name] += 1
    return {"study": study.name, "storage": label, "output_dir": str(study.output_dir),
            "stored": opt is not None, "n_trials": len(trials), "counts": tally(trials), "states": states,
            "best": best_record(trials),
            "cpu_seconds": float(sum(float(t.user_attrs.get("cpu_seconds") or 0.0)
                                     for t in trials))}
