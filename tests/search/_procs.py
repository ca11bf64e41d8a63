"""Real ``searcher run`` processes for the fault tests, and waiting for a trial in flight."""
from __future__ import annotations

import os
import subprocess
import sys
import time

from optuna.trial import TrialState

__all__ = ["start", "wait_for", "running_trial"]


def start(path, *extra, env: dict | None = None) -> subprocess.Popen:
    """``searcher run <path> --plain <extra>`` in a new process (one torch thread)."""
    full = dict(os.environ, OMP_NUM_THREADS="1", **(env or {}))
    return subprocess.Popen([sys.executable, "-m", "searcher", "run", str(path), "--plain",
                             *extra], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env=full)


def wait_for(check, procs, limit: float = 240.0, what: str = "the condition"):
    """Poll ``check()`` until it returns something truthy (up to ``limit`` s) while every
    process in ``procs`` is alive."""
    end = time.monotonic() + limit
    while time.monotonic() < end and all(p.poll() is None for p in procs):
        try:
            found = check()
        except KeyError:  # the study is not created yet
            found = None
        if found:
            return found
        time.sleep(0.1)
    outputs = [p.communicate(timeout=60) if p.poll() is not None else "alive" for p in procs]
    raise AssertionError(f"{what} did not happen: {outputs}")


def running_trial(opt_of, done_before: int = 0):
    """A check for ``wait_for``: a RUNNING trial that reported an epoch, once
    ``done_before`` trials have finished; ``opt_of()`` opens the study."""
    def check():
        trials = opt_of().get_trials()
        done = [t for t in trials if t.state.is_finished()]
        busy = [t for t in trials if t.state == TrialState.RUNNING and t.intermediate_values]
        return (done, busy[0]) if len(done) >= done_before and busy else None
    return check
