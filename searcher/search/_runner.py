"""``run_study``: start the workers, watch the store, stop cleanly.

The calling process prepares everything once (dataset cache, Optuna study, MLflow parent
run), recovers lost trials, then starts ``workers`` worker processes (spawn context; a single
worker runs in a thread of this process) and shows progress until they are done.  Workers
recover lost trials themselves before each trial (``settle``), under the shared lock.

A database that stops answering only pauses the progress display here; the workers retry
with backoff and, if it stays away, stop with a ``UserError`` that this process passes on
(exit code 2, nothing finished is lost).

Stopping: SIGINT or SIGTERM asks every worker to finish its current epoch; that trial is
recorded as interrupted (FAIL, re-queued on resume) and the run returns exit code 130
(SIGINT) or 143 (SIGTERM).  A deadline (``--hours``/``--until`` or ``search.budget``) works
the same way but returns 0.  Running the same command again continues the study.
"""
from __future__ import annotations

import datetime as dt
import math
import multiprocessing as mp
import signal
import threading
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path

from searcher.errors import UserError, ensure_folder

__all__ = ["run_study", "RunSummary", "parse_until", "deadline_of"]


@dataclass
class RunSummary:
    """What ``run_study`` did.  ``exit_code``: 0, 130 (SIGINT) or 143 (SIGTERM)."""

    exit_code: int
    counts: dict
    best: dict | None
    storage: str
    tracking: str
    output_dir: str
    n_trials: int
    notes: list = field(default_factory=list)


def parse_until(text: str, now: dt.datetime | None = None) -> float:
    """``"HH:MM"`` → the next such local clock time as ``time.time()`` seconds."""
    now = now or dt.datetime.now()
    try:
        hour, minute = (int(p) for p in text.split(":"))
        if not (0 <= hour < 24 and 0 <= minute < 60) or len(text.split(":")[1]) != 2:
            raise ValueError
    except ValueError:
        raise UserError.single(f"must be a local clock time HH:MM, but got {text!r}",
                               path="--until / search.budget.until") from None
    at = now.replace(hour=hour, minute=minute, second=0, microsecond=0)
    if at <= now:
        at += dt.timedelta(days=1)
    return at.timestamp()


def deadline_of(hours: float, until: str, start: float) -> float:
    """The earlier of ``start + hours`` and ``until`` (0 = none)."""
    ends = []
    if hours and float(hours) > 0:
        ends.append(start + float(hours) * 3600.0)
    if until:
        ends.append(parse_until(until))
    return min(ends) if ends else 0.0


class _Signals:
    """Turns SIGINT/SIGTERM into a stop request (restored on exit)."""

    def __init__(self, event) -> None:
        self.event, self.code, self.old = event, 0, {}

    def __enter__(self):
        if threading.current_thread() is threading.main_thread():
            for sig, code in ((signal.SIGINT, 130), (signal.SIGTERM, 143)):
                self.old[sig] = signal.signal(sig, self._handler(code))
        return self

    def _handler(self, code):
        def handle(signum, frame):
            self.code = self.code or code
            self.event.set()
        return handle

    def __exit__(self, *exc):
        for sig, old in self.old.items():
            signal.signal(sig, old)


def run_study(study, *, workers: int | None = None, trials: int | None = None,
              hours: float | None = None, until: str | None = None,
              storage: str | None = None, out: str | Path | None = None,
              live: bool | None = None, echo=print, new_space: bool = False) -> RunSummary:
    """Run (or continue) a study until its budget, deadline or a signal.

    Args:
        study: a loaded study (``searcher.spec.load_study``).
        workers: worker processes (default ``search.workers``).
        trials: total trials in the store to reach (default ``search.budget.trials``; 0 = no
            limit).
        hours: stop starting epochs after this many hours (default ``search.budget.hours``).
        until: ``"HH:MM"`` local deadline (default ``search.budget.until``).
        storage: storage URL overriding ``search.storage``.
        out: output folder overriding the study's.
        live: rich live panel (default: when stdout is a terminal); else plain lines.
        echo: where plain progress lines go.
        new_space: add trials to a store whose study was made from another space (else a
            changed space is refused; see :func:`open_store`).

    Returns:
        A :class:`RunSummary`.
    """
    from searcher.data import build_dataset, check_cutoff

    from ._live import Monitor
    from searcher.outcomes import best_record, tally
    from ._recover import recover
    from ._store import open_store, storage_down, storage_label
    from ._tracking import prepare_tracking
    from ._urls import mask_url
    from ._worker import WorkerArgs, worker_loop, worker_process

    start = time.time()
    # the folder is named by --out, else by the study's output.folder
    where = {"key": "--out"} if out is not None else {"key": "output.folder",
                                                       "file": str(study.path)}
    if out is not None:
        study.output_dir = Path(out)
    output_dir = Path(study.output_dir).resolve()
    study.output_dir = output_dir
    cfg = study.fixed()
    search = cfg["search"]
    workers = int(workers if workers is not None else search["workers"])
    if workers < 1:
        raise UserError.single(f"must be at least 1, but got {workers}", path="--workers")
    # the study file's budget is checked by the spec; the overrides are checked here, since
    # a negative count would end the run at once and a negative or NaN time would lift it
    if trials is not None and int(trials) < 0:
        raise UserError.single(f"must be at least 0 (0 = no limit), but got {trials}",
                               path="--trials")
    if hours is not None and not (math.isfinite(float(hours)) and float(hours) >= 0):
        raise UserError.single(f"must be a finite number of hours >= 0 (0 = no limit), but "
                               f"got {hours}", path="--hours")
    budget = int(trials if trials is not None else search["budget"]["trials"])
    deadline = deadline_of(hours if hours is not None else search["budget"]["hours"],
                           until if until is not None else search["budget"]["until"], start)
    ensure_folder(output_dir, **where)
    opt = open_store(study, storage, new_space=new_space)   # a changed space stops here
    with warnings.catch_warnings(record=True) as caught:
        # the data's own warnings (isolated nodes, ...) become one note each, printed once
        # by the caller, not a Python warning per process
        warnings.simplefilter("always", UserWarning)
        dataset = build_dataset(cfg["task"], cache_dir=output_dir / "cache")
        check_cutoff(study, dataset.graphs)   # once per dataset, not once per trial
    notes = list(dict.fromkeys(f"data: {w.message}" for w in caught
                               if issubclass(w.category, UserWarning)))
    lost, queued = recover(opt)
    if lost or queued:
        notes.append(f"recovered {lost} lost trial(s), re-queued {queued} interrupted one(s)")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        info = prepare_tracking(study, cfg, output_dir)
    if info is None:
        notes.append("tracking is off for this run (see the warning above); the Optuna store "
                     "keeps every result")
    tracking = mask_url(info.uri) if info else "off"
    label = storage_label(study, storage)
    for note in notes:
        echo(note)

    ctx = mp.get_context("spawn")
    inline = workers == 1
    stop_event = threading.Event() if inline else ctx.Event()
    lock = threading.Lock() if inline else ctx.Lock()
    args = [WorkerArgs(str(Path(study.path).resolve()), str(output_dir), storage, k, budget,
                       deadline, info) for k in range(workers)]
    with _Signals(stop_event) as sig:
        if inline:
            errors: list = []

            def body() -> None:
                import torch

                torch.set_num_threads(1)
                try:
                    worker_loop(args[0], lock, stop_event.is_set)
                except BaseException as err:  # reported by the calling thread
                    errors.append(err)
            handles = [threading.Thread(target=body, name="searcher-worker", daemon=True)]
        else:
            handles = [ctx.Process(target=worker_process, args=(a, lock, stop_event),
                                   name=f"searcher-worker-{a.index}") for a in args]
        for h in handles:
            h.start()
        monitor = Monitor(study, opt, budget=budget, deadline=deadline, start=start,
                          live=live, echo=echo, storage=label)

        def quietly(fn, *a, **kw) -> bool:
            try:
                fn(*a, **kw)
                return True
            except Exception as err:  # the workers decide whether an outage is fatal
                if not storage_down(err):
                    raise
                return False
        with monitor:
            while any(h.is_alive() for h in handles):
                for h in handles:
                    h.join(timeout=monitor.interval / max(1, len(handles)))
                quietly(monitor.update)
            if quietly(recover, opt, requeue=False):
                monitor.update(final=True)
        if inline and errors:
            raise errors[0]
        lost = [h.name for h in handles if not inline and h.exitcode == 2]
        if lost:
            raise UserError.single(
                f"must stay reachable, but {', '.join(lost)} lost the connection to {label} "
                "(see the errors above); every finished trial is kept there, so run the same "
                "command again once it is back", path="--storage" if storage else
                "search.storage")
        for h in handles:
            if not inline and h.exitcode not in (0, None):
                notes.append(f"worker {h.name} ended with exit code {h.exitcode}; its trial "
                             "was recorded as interrupted and will be retried on resume")
        code = sig.code
    trials_now = opt.get_trials(deepcopy=False)
    return RunSummary(code, tally(trials_now), best_record(trials_now), label, tracking,
                      str(output_dir), len(trials_now), notes)
