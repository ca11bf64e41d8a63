"""The worker loop: take trials until the budget, the deadline or a signal says stop.

A worker runs in its own process (``multiprocessing`` spawn context, one torch thread) or,
for a single worker, in a thread of the calling process.  The budget counts trials in the
store (every outcome except interrupted, plus those running), so several workers, and
several ``searcher run`` processes sharing one store, stop together; a lock shared by the
local workers makes the check-then-start step atomic on one machine.
"""
from __future__ import annotations

import logging
import signal
import time
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

__all__ = ["WorkerArgs", "worker_loop", "worker_process", "load_for_run"]

log = logging.getLogger("searcher")


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


def worker_loop(args: WorkerArgs, lock, should_stop: Callable[[], bool]) -> int:
    """Run trials until told to stop; returns the number of trials this worker ran."""
    import optuna

    from ._outcomes import finished
    from ._store import open_store
    from ._tracking import Tracker
    from ._trial import TrialFailed, TrialRunner

    study, dataset = load_for_run(args.study_path, args.output_dir)
    opt = open_store(study, args.storage, worker=args.index)
    # failed trials are logged by the runner with their traceback; Optuna's copy is noise
    optuna.logging.set_verbosity(optuna.logging.ERROR)
    tracker = Tracker(args.tracking)
    held = [False]

    def release() -> None:
        if held[0]:
            held[0] = False
            lock.release()

    def stop() -> bool:
        return should_stop() or (args.deadline > 0 and time.time() >= args.deadline)

    runner = TrialRunner(study, dataset, tracker, stop, args.index, on_start=release)
    ran = 0
    while not stop():
        lock.acquire()
        held[0] = True
        try:
            trials = opt.get_trials(deepcopy=False)
            busy = sum(1 for t in trials if t.state == optuna.trial.TrialState.RUNNING)
            if args.trials and finished(trials) + busy >= args.trials:
                break
            opt.optimize(runner, n_trials=1, catch=(TrialFailed,), gc_after_trial=False)
            ran += 1
        finally:
            release()
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
