"""The contract of a stored trial, read by search, analysis and report: outcome names, their
mapping from Optuna states, and the MLflow tag names.  No torch here (analysis reads studies
without the training code).

Trial outcomes and how each is stored in Optuna:

=============  ============  ===============================================================
outcome        Optuna state  why
=============  ============  ===============================================================
completed      COMPLETE      value = best validation loss
timeout        COMPLETE      value = best validation loss reached within the time limit
pruned         PRUNED        the pruner stopped it (``pruned_at`` = epoch); Optuna keeps the
                             last reported loss as its value
diverged       PRUNED        plus constraint ``stable = 1``: infeasible, so TPE ranks it below
                             every feasible trial and ``best_trial`` never picks it; its
                             losses stay visible as intermediate values
rejected       PRUNED        plus constraints ``params``/``cost``/``gate`` > 0 (relative
                             excess over the guard): never trained, recorded so the sampler
                             learns to avoid the region
interrupted    FAIL          a signal, deadline or lost worker ended it; re-queued (same
                             parameters) when the study is resumed
failed         FAIL          an error in training; not retried
=============  ============  ===============================================================

A trial without an ``outcome`` attribute takes one from its state (:data:`STATE_OUTCOME`):
a FAIL trial without one is one whose worker died, so it counts as interrupted (and is
re-queued on resume), everywhere.  Budgets count every outcome except ``interrupted``.

MLflow tags (:data:`TAGS`): a study's parent run carries ``role = study``, ``study`` (its name),
``study_hash`` and ``summary``; a trial's child run ``role = trial`` and ``trial`` (its
number), and when it ends ``outcome``, ``reason``, ``pruned_at`` and ``config`` (the resolved
configuration as YAML).  Every tag name is prefixed ``searcher.``.
"""
from __future__ import annotations

import math

from optuna.trial import FrozenTrial, TrialState

__all__ = ["OUTCOMES", "outcome_of", "tally", "best_record", "finished", "ranked_values",
           "VALUED", "STATE_OUTCOME", "TAGS", "STUDY_ROLE", "TRIAL_ROLE"]

OUTCOMES = ("completed", "pruned", "diverged", "rejected", "timeout", "interrupted", "failed")
VALUED = ("completed", "timeout")  # outcomes whose value is a real best validation loss
# The outcome of a finished trial stored without an ``outcome`` attribute.
STATE_OUTCOME = {TrialState.COMPLETE: "completed", TrialState.PRUNED: "pruned",
                 TrialState.FAIL: "interrupted"}

TAGS = {name: f"searcher.{name}" for name in ("role", "study", "study_hash", "summary", "trial",
                                              "outcome", "reason", "pruned_at", "config")}
STUDY_ROLE, TRIAL_ROLE = "study", "trial"


def outcome_of(trial: FrozenTrial) -> str:
    """The trial's outcome, or ``running`` / ``waiting`` while it has none."""
    outcome = trial.user_attrs.get("outcome")
    if outcome and trial.state.is_finished():
        return str(outcome)
    if trial.state in STATE_OUTCOME:
        return STATE_OUTCOME[trial.state]
    return {TrialState.RUNNING: "running", TrialState.WAITING: "waiting"}[trial.state]


def finished(trials) -> int:
    """Trials that count against the budget (every outcome except interrupted)."""
    return sum(1 for t in trials if t.state.is_finished() and outcome_of(t) != "interrupted")


def tally(trials) -> dict[str, int]:
    """Outcome (and ``running``/``waiting``) → count, every outcome present."""
    counts = {k: 0 for k in OUTCOMES + ("running", "waiting")}
    for t in trials:
        counts[outcome_of(t)] = counts.get(outcome_of(t), 0) + 1
    return counts


def ranked_values(trials) -> list[tuple[float, int]]:
    """``(value, number)`` of trials with a real value, best first."""
    out = [(float(t.value), t.number) for t in trials if t.state == TrialState.COMPLETE
           and outcome_of(t) in VALUED and t.value is not None and math.isfinite(t.value)]
    return sorted(out)


def best_record(trials) -> dict | None:
    """``{number, value, config}`` of the best completed trial, or None."""
    ranked = ranked_values(trials)
    if not ranked:
        return None
    value, number = ranked[0]
    trial = next(t for t in trials if t.number == number)
    return {"number": number, "value": value, "config": trial.user_attrs.get("config")}
