"""Stale-trial recovery and re-queueing on resume.

Every trial records the ``host`` and ``pid`` of the worker that runs it.  A RUNNING trial
whose host is this machine and whose process no longer exists was lost (the worker was
killed): it is marked FAIL (outcome interrupted).  Every interrupted trial that has not been
retried yet is queued again with the same parameters (``study.enqueue_trial``; the retry
carries ``retry_of = <number>``).

On a store with heartbeats (PostgreSQL), lost trials of every machine, this one included, are
left to the heartbeat: ``settle`` calls Optuna's ``fail_stale_trials`` and the storage's
``RetryFailedTrialCallback`` re-queues them (system attribute ``failed_trial``); ``recover``
then only re-queues trials a signal or deadline stopped (outcome ``interrupted`` recorded),
so one lost trial is never queued twice.
"""
from __future__ import annotations

import os
import socket

import warnings

import optuna
from optuna.storages._heartbeat import is_heartbeat_enabled
from optuna.trial import TrialState

from searcher.outcomes import outcome_of

__all__ = ["recover", "settle", "process_alive", "HOST"]

HOST = socket.gethostname()


def process_alive(pid: int) -> bool:
    """Whether a process with ``pid`` exists on this machine."""
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by someone else
        return True
    return True


def recover(opt: optuna.Study, *, requeue: bool = True) -> tuple[int, int]:
    """Fail lost RUNNING trials of this host and re-queue interrupted ones.

    Returns:
        ``(failed, queued)`` counts.
    """
    beating = is_heartbeat_enabled(opt._storage)
    trials = opt.get_trials(deepcopy=False)
    lost = 0
    for t in trials if not beating else ():
        if t.state == TrialState.RUNNING and t.user_attrs.get("host") == HOST \
                and "pid" in t.user_attrs and not process_alive(t.user_attrs["pid"]):
            opt.tell(t.number, state=TrialState.FAIL, skip_if_finished=True)
            lost += 1
    if not requeue:
        return lost, 0
    trials = opt.get_trials(deepcopy=False) if lost else trials
    retried = {t.user_attrs.get("retry_of") for t in trials} | \
        {t.system_attrs.get("failed_trial") for t in trials}
    queued = 0
    for t in trials:
        stopped = t.user_attrs.get("outcome") == "interrupted" or not beating
        if t.state == TrialState.FAIL and outcome_of(t) == "interrupted" and stopped \
                and t.number not in retried and t.params:
            opt.enqueue_trial(t.params, user_attrs={"retry_of": t.number})
            queued += 1
    return lost, queued


def settle(opt: optuna.Study) -> None:
    """Resolve lost trials before counting the budget: stale ones on a heartbeat store
    (failed and re-queued by the storage's callback), else this host's dead processes."""
    if is_heartbeat_enabled(opt._storage):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            optuna.storages.fail_stale_trials(opt)
    else:
        recover(opt)
