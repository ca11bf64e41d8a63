"""Faults on one machine (journal store): a worker process killed while its sibling runs,
SIGTERM during an epoch, a tracker that cannot be reached.

SIGKILL of the whole command and SIGINT are in test_resume.py; PostgreSQL faults in
test_postgres.py.
"""
from __future__ import annotations

import os
import signal

import pytest
from optuna.trial import TrialState

from searcher.search import finished, open_store, outcome_of
from searcher.spec import load_study

from ._procs import running_trial, start, wait_for

pytestmark = pytest.mark.slow

LONG = {"model": {"family": "node_mlp"}, "training": {"epochs": 80, "batch_size": 1},
        "search": {"pruner": {"max_epochs": 80}}}


def _opener(study):
    """``opt_of()`` for polling: one journal reader (it re-reads only what was appended)."""
    cache = {}

    def opt_of():
        if "opt" not in cache:
            if not study.output_dir.joinpath("study.journal").exists():
                raise KeyError(study.name)
            cache["opt"] = open_store(study)
        return cache["opt"]
    return opt_of


def test_killed_worker_process_is_recovered_by_its_sibling(write_study):
    path = write_study({**LONG, "search": {**LONG["search"], "budget": {"trials": 3}}},
                       name="sibling")
    study = load_study(path)
    proc = start(path, "--workers", "2")
    _, lost = wait_for(running_trial(_opener(study)), [proc], what="a trial in flight")
    assert lost.user_attrs["pid"] != proc.pid  # a worker process, not the command
    os.kill(lost.user_attrs["pid"], signal.SIGKILL)
    out, err = proc.communicate(timeout=300)
    assert proc.returncode == 0 and "Traceback" not in err, err
    assert "ended with exit code -9" in out
    trials = open_store(study).get_trials()
    dead = trials[lost.number]
    assert dead.state == TrialState.FAIL and outcome_of(dead) == "interrupted"
    # local stale-process recovery re-queued it once, and the other worker ran it
    retries = [t for t in trials if t.user_attrs.get("retry_of") == lost.number]
    assert len(retries) == 1 and retries[0].params == dead.params
    assert retries[0].state == TrialState.COMPLETE and finished(trials) == 3


def test_sigterm_during_an_epoch_exits_143_and_resumes(write_study):
    path = write_study({**LONG, "search": {**LONG["search"], "budget": {"trials": 2}}},
                       name="termed")
    study = load_study(path)
    proc = start(path, "--workers", "2")
    _, running = wait_for(running_trial(_opener(study)), [proc], what="a trial in flight")
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 143 and "Traceback" not in err, err
    trials = open_store(study).get_trials()
    stopped = trials[running.number]
    assert stopped.state == TrialState.FAIL and outcome_of(stopped) == "interrupted"
    # stopped at an epoch boundary: every epoch it ran was reported
    assert stopped.user_attrs["epochs"] == len(stopped.intermediate_values) < 80
    assert not [t for t in trials if t.state == TrialState.RUNNING]
    resumed = start(path)
    out, err = resumed.communicate(timeout=300)
    assert resumed.returncode == 0, err
    trials = open_store(study).get_trials()
    assert any(t.user_attrs.get("retry_of") == running.number for t in trials)
    assert finished(trials) == 2


def test_unreachable_tracker_warns_once_and_optuna_keeps_every_trial(write_study):
    # port 9 (discard) on this machine: nothing answers (common practice)
    path = write_study({"model": {"family": "node_mlp"}, "training": {"epochs": 1},
                        "search": {"pruner": {"max_epochs": 1}, "budget": {"trials": 3}},
                        "tracking": {"uri": "http://127.0.0.1:9/"}}, name="notrack")
    study = load_study(path)
    proc = start(path)
    out, err = proc.communicate(timeout=300)
    assert proc.returncode == 0 and "Traceback" not in err, err
    assert (out + err).count("tracking to http://127.0.0.1:9/ is off") == 1
    assert "tracking is off for this run" in out
    trials = open_store(study).get_trials()
    assert len(trials) == 3 and all(outcome_of(t) == "completed" for t in trials)
    assert all(t.user_attrs["mlflow_run_id"] == "" for t in trials)
