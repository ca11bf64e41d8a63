"""The worker loop: take trials until the budget, the deadline or a signal says stop.

A worker runs in its own process (``multiprocessing`` spawn context, one torch thread) or,
for a single worker, in a thread of the calling process.  The budget counts trials in the
store (every outcome except interrupted, plus those running), so several workers, and
several ``searcher run`` processes sharing one store, stop together; a lock shared by the
local workers makes the check-then-start step atomic on one machine.  A worker leaves only
when the finished trials meet the budget: while the rest are still running it waits, so that
it can take over a trial whose worker was lost (stale heartbeat, or a dead process here).

A database that stops answering is retried with backoff for the grace period (4
heartbeats); then the worker stops with a :class:`UserError` (exit code 2).  Trials already
finished are in the database; the one in flight is found stale and retried later.
"""
from __future__ import annotations

import logging
import os
import signal
import sys
import threading
import time
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from searcher.errors import UserError

__all__ = ["WorkerArgs", "TurnLock", "worker_loop", "worker_process", "load_for_run"]

log = logging.getLogger("searcher")
_LOCK_SECONDS = 60.0
_LOCK_RETRY_SECONDS = 2.0   # after a lock timeout: its holder most likely died


@dataclass(frozen=True)
class WorkerArgs:
    """Everything a worker needs (picklable for the spawn context)."""

    study_path: str
    output_dir: str
    storage: str | None
    index: int
    trials: int          # total budget in the store; 0 = no limit
    deadline: float      # time.time() after which no epoch starts; 0 = none
    tracking: object     # TrackingInfo or None


def load_for_run(study_path: str, output_dir: str):
    """Load the study with its output folder set and build (or read) its dataset."""
    from searcher.data import build_dataset
    from searcher.spec import load_study

    study = load_study(study_path)
    study.output_dir = Path(output_dir)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # the starting process showed them
        dataset = build_dataset(study.fixed()["task"], cache_dir=study.output_dir / "cache")
    return study, dataset


class _Outage:
    """Backoff while the database is unreachable; gives up after ``grace`` seconds."""

    def __init__(self, study, storage: str | None, grace: float) -> None:
        from ._store import storage_label

        self.study, self.cli, self.grace = study, bool(storage), float(grace)
        self.label = storage_label(study, storage)
        self.since: float | None = None
        self.tries = 0

    def clear(self) -> None:
        if self.since is not None:
            log.warning("the storage %s answers again", self.label)
        self.since, self.tries = None, 0

    def wait(self, err: BaseException) -> None:
        """Sleep before the next try, or raise ``UserError`` once the grace period is over."""
        from ._urls import mask_url

        now = time.monotonic()
        if self.since is None:
            self.since = now
            log.warning("lost the storage %s (%s); retrying for up to %.0f s", self.label,
                        type(err).__name__, self.grace)
        left = self.grace - (now - self.since)
        if left <= 0:
            text = [line for line in mask_url(str(err)).strip().splitlines()
                    if line.strip() and not line.startswith("(Background")]
            where = {"path": "--storage"} if self.cli else {
                "file": str(getattr(self.study, "path", "")), "path": "search.storage"}
            raise UserError.single(
                f"must stay reachable, but the connection to {self.label} was lost and did not "
                f"come back within {self.grace:.0f} s ({type(err).__name__}: "
                f"{text[0] if text else ''}); every finished trial is kept there, so run the "
                f"same command again once the database is back", **where) from None
        time.sleep(min(0.5 * 2 ** self.tries, left))
        self.tries += 1


def _quiet_heartbeat_errors() -> None:
    """Optuna's heartbeat thread dies with a traceback when the database goes away; the
    worker's own backoff reports the outage, so that traceback is shortened to one line."""
    from ._store import storage_down

    default = threading.excepthook

    def hook(args) -> None:
        if args.exc_value is not None and storage_down(args.exc_value):
            log.warning("heartbeat stopped: %s", type(args.exc_value).__name__)
            return
        default(args)
    threading.excepthook = hook


class TurnLock:
    """The workers' budget lock, with a patience that shrinks once a holder is taken for dead.

    A worker killed while holding the lock never releases it: after ``_LOCK_SECONDS`` the
    others go on without it (at worst one trial beyond the budget).  From then on the holder
    is taken for dead and each turn waits ``_LOCK_RETRY_SECONDS``, not the full time again
    on every trial (which made a sweep with a dead holder crawl).
    """

    def __init__(self, lock) -> None:
        self.lock = lock
        self.patience = _LOCK_SECONDS

    def acquire(self) -> bool:
        """True when the lock was taken (release it then), False after the patience."""
        got = bool(self.lock.acquire(timeout=self.patience))
        if not got:
            self.patience = _LOCK_RETRY_SECONDS
        return got


def _next_step(opt, budget: int) -> str:
    """``run`` a trial, ``wait`` for running ones (one may be lost and need a retry), or
    ``done``."""
    import optuna

    from searcher.outcomes import finished
    from ._recover import HOST, settle

    settle(opt)
    trials = opt.get_trials(deepcopy=False)
    done = finished(trials)
    busy = [t for t in trials if t.state == optuna.trial.TrialState.RUNNING]
    if not budget or done + len(busy) < budget:
        return "run"
    if done >= budget:
        return "done"
    from optuna.storages._heartbeat import is_heartbeat_enabled

    # Only lost trials that can be detected are worth waiting for: any on a heartbeat
    # store, this host's on a journal (another host's journal trials wait for that host).
    if is_heartbeat_enabled(opt._storage) or any(t.user_attrs.get("host") == HOST
                                                 for t in busy):
        return "wait"
    return "done"


def worker_loop(args: WorkerArgs, lock, should_stop: Callable[[], bool]) -> int:
    """Run trials until told to stop; returns the number of trials this worker ran."""
    import optuna

    from ._recover import HOST
    from ._registry import sampler_seed
    from ._store import (GRACE_FACTOR, heartbeat_of, open_store, shared_store,
                         storage_down)
    from ._fleet_lock import fleet_lock
    from ._tracking import Tracker
    from ._trial import TrialFailed, TrialRunner

    study, dataset = load_for_run(args.study_path, args.output_dir)
    # identical commands on many hosts all have index 0: the host and process tell them apart
    origin = f"{HOST}:{os.getpid()}" if shared_store(study, args.storage) else ""
    opt = open_store(study, args.storage, worker=args.index, origin=origin)
    seed = sampler_seed(study.fixed()["search"]["seed"], args.index, origin)
    # failed trials are logged by the runner with their traceback; Optuna's copy is noise
    optuna.logging.set_verbosity(optuna.logging.ERROR)
    _quiet_heartbeat_errors()
    tracker = Tracker(args.tracking)
    beat = heartbeat_of(study)
    outage = _Outage(study, args.storage, GRACE_FACTOR * beat)
    held = [False]
    fleet = fleet_lock(opt)  # across hosts on PostgreSQL; None elsewhere

    def release() -> None:
        if held[0]:
            held[0] = False
            lock.release()
        if fleet is not None:
            fleet.release()

    def stop() -> bool:
        return should_stop() or (args.deadline > 0 and time.time() >= args.deadline)

    runner = TrialRunner(study, dataset, tracker, stop, args.index, on_start=release,
                         attrs={"sampler_seed": seed})
    ran = 0
    turn = TurnLock(lock)
    while not stop():
        step = "run"
        held[0] = turn.acquire()
        try:
            if fleet is not None:
                fleet.acquire()
            step = _next_step(opt, args.trials)
            if step == "run":
                opt.optimize(runner, n_trials=1, catch=(TrialFailed,), gc_after_trial=False)
                ran += 1
            outage.clear()
        except Exception as err:
            cause = storage_down(err)
            if cause is None:
                raise
            release()
            outage.wait(cause)
            continue
        finally:
            release()
        if step == "done":
            break
        if step == "wait":
            time.sleep(min(1.0, beat))
    return ran


def worker_process(args: WorkerArgs, lock, stop_event) -> None:
    """Entry point of a spawned worker: one torch thread, signals end the current epoch."""
    import torch

    torch.set_num_threads(1)
    flag = [False]

    def on_signal(signum, frame) -> None:
        if flag[0]:  # a second signal: stop at once
            raise KeyboardInterrupt
        flag[0] = True

    signal.signal(signal.SIGINT, on_signal)
    signal.signal(signal.SIGTERM, on_signal)
    logging.basicConfig(level=logging.WARNING, format="%(levelname)s worker "
                        f"{args.index}: %(message)s")
    try:
        worker_loop(args, lock, lambda: flag[0] or stop_event.is_set())
    except KeyboardInterrupt:
        pass
    except UserError as err:  # the storage was lost: a located message, no traceback
        print(f"error: {err}", file=sys.stderr)
        sys.exit(2)
