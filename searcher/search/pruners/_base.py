"""The root of our own pruners: Optuna's one-method interface plus the curve readers they share.

A pruner here is an :class:`optuna.pruners.BasePruner` whose only decision is
``prune(study, trial) -> bool``.  Steps are epochs counted from 1 and the study minimises the
validation loss (DEVELOPERS.md, "Contracts/search"), so every pruner reads the same two things:
the running trial's curve and the finished trials' curves with their final values.
"""
from __future__ import annotations

import math

import numpy as np
import optuna
from optuna.trial import TrialState

__all__ = ["BaseCurvePruner", "curve_of"]


def curve_of(trial: optuna.trial.FrozenTrial, step: int) -> np.ndarray:
    """Intermediate values 1..step as an array (NaN where an epoch was not reported)."""
    curve = np.full(step, np.nan)
    for s, v in trial.intermediate_values.items():
        if 1 <= s <= step:
            curve[s - 1] = v
    return curve


class BaseCurvePruner(optuna.pruners.BasePruner):
    """Base of the pruners that judge a trial by its validation-loss curve.

    Subclasses implement :meth:`prune`; they call :meth:`check_direction` first.
    """

    @staticmethod
    def check_direction(study: optuna.Study) -> None:
        if study.direction != optuna.study.StudyDirection.MINIMIZE:
            raise ValueError("curve pruners need a minimising study, but got direction="
                             f"{study.direction.name}.")

    @staticmethod
    def finished(study: optuna.Study) -> tuple[list[np.ndarray], list[float]]:
        """Curves and final values of COMPLETE trials (no finite value: best intermediate)."""
        curves, finals = [], []
        for t in study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,)):
            curve = curve_of(t, t.last_step or 0)
            v = t.value
            if v is None or not math.isfinite(v):
                finite = curve[np.isfinite(curve)]
                v = float(finite.min()) if finite.size else None
            if v is not None:
                curves.append(curve)
                finals.append(float(v))
        return curves, finals

    def prune(self, study: optuna.Study, trial: optuna.trial.FrozenTrial) -> bool:
        raise NotImplementedError
