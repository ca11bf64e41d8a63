"""Stale-trial recovery on a store without heartbeats: lost trials failed, queued once."""
from __future__ import annotations

import os
import subprocess
import sys

import optuna
from optuna.distributions import FloatDistribution
from optuna.trial import TrialState

from searcher.search._recover import HOST, process_alive, recover


def _dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()  # reaped: no process holds this pid now
    return proc.pid


def _study():
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    return optuna.create_study(storage=optuna.storages.InMemoryStorage())


def test_lost_trial_is_failed_and_queued_again_once():
    opt = _study()
    lost = opt.ask({"x": FloatDistribution(0.0, 1.0)})
    lost.set_user_attr("host", HOST)
    lost.set_user_attr("pid", _dead_pid())
    alive = opt.ask({"x": FloatDistribution(0.0, 1.0)})
    alive.set_user_attr("host", HOST)
    alive.set_user_attr("pid", os.getpid())  # this process: still running
    assert not process_alive(lost.user_attrs["pid"]) and process_alive(alive.user_attrs["pid"])

    assert recover(opt) == (1, 1)
    trials = opt.get_trials()
    assert trials[lost.number].state == TrialState.FAIL
    assert trials[alive.number].state == TrialState.RUNNING
    (retry,) = [t for t in trials if t.state == TrialState.WAITING]
    assert retry.user_attrs["retry_of"] == lost.number
    # the queued trial asks for the lost one's parameters again
    again = opt.ask()
    assert again.number == retry.number and again.suggest_float("x", 0.0, 1.0) == lost.params["x"]
    # a second recovery finds the retry and queues nothing more
    assert recover(opt) == (0, 0)


def test_only_interrupted_trials_are_queued():
    opt = _study()
    for outcome in ("interrupted", "failed"):
        t = opt.ask({"x": FloatDistribution(0.0, 1.0)})
        t.set_user_attr("outcome", outcome)
        opt.tell(t, state=TrialState.FAIL)
    assert recover(opt) == (0, 1)
    (retry,) = [t for t in opt.get_trials() if t.state == TrialState.WAITING]
    assert retry.user_attrs["retry_of"] == 0  # the interrupted one; a failed run is not retried
    assert recover(opt, requeue=False) == (0, 0)
