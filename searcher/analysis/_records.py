"""Reading trial records out of an Optuna study (the search layer's record contract).

Analysis never trains; everything here comes from what the store holds: the value, the
per-epoch validation losses (intermediate values, step = epoch from 1) and the user attrs
written by the search layer (``outcome``, ``config``, ``cpu_seconds``, ``pruned_at`` ...).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import optuna

from searcher.outcomes import OUTCOMES, STATE_OUTCOME

__all__ = ["OUTCOMES", "TrialRecord", "read_trials", "count_outcomes"]



@dataclass
class TrialRecord:
    """One finished trial as analysis sees it.

    Shapes:
        curve: ``[epochs_run]`` validation loss per epoch (may be empty).
    """

    number: int
    outcome: str
    curve: np.ndarray
    best_value: float
    params: dict
    distributions: dict = field(default_factory=dict)
    config: dict = field(default_factory=dict)
    epochs: int = 0
    cpu_seconds: float = 0.0
    pruned_at: int | None = None
    data_hash: str = ""
    study_hash: str = ""

    @property
    def has_curve(self) -> bool:
        return self.curve.size > 0


def _as_float(value, default: float) -> float:
    try:
        out = float(value)
    except (TypeError, ValueError):
        return default
    return out


def _record(trial: optuna.trial.FrozenTrial) -> TrialRecord | None:
    attrs = trial.user_attrs
    # a trial without an ``outcome`` attribute (its worker died, or written by hand) takes
    # the contract's outcome of its state
    outcome = attrs.get("outcome") or STATE_OUTCOME.get(trial.state)
    if outcome is None:  # running or waiting: not finished, nothing to read yet
        return None
    steps = sorted(trial.intermediate_values)
    curve = np.array([trial.intermediate_values[s] for s in steps], dtype=float)
    best = attrs.get("best_value", trial.value)
    if best is None:
        finite = curve[np.isfinite(curve)]
        best = float(finite.min()) if finite.size else math.nan
    pruned_at = attrs.get("pruned_at")
    return TrialRecord(
        number=trial.number, outcome=str(outcome), curve=curve,
        best_value=_as_float(best, math.nan), params=dict(trial.params),
        distributions=dict(trial.distributions),
        config=dict(attrs.get("config") or {}),
        epochs=int(attrs.get("epochs", curve.size) or 0),
        cpu_seconds=_as_float(attrs.get("cpu_seconds"), 0.0),
        pruned_at=int(pruned_at) if pruned_at is not None else None,
        data_hash=str(attrs.get("data_hash", "")), study_hash=str(attrs.get("study_hash", "")))


def read_trials(optuna_study: optuna.Study) -> list[TrialRecord]:
    """All finished trials of ``optuna_study`` in trial-number order."""
    trials = optuna_study.get_trials(deepcopy=False)
    records = [_record(t) for t in trials]
    return sorted((r for r in records if r is not None), key=lambda r: r.number)


def count_outcomes(records: list[TrialRecord]) -> dict[str, int]:
    """Trials per outcome; every known outcome is listed, unknown ones are added."""
    counts = {name: 0 for name in OUTCOMES}
    for rec in records:
        counts[rec.outcome] = counts.get(rec.outcome, 0) + 1
    return counts
