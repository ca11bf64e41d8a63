"""``worker_scaling`` and ``overhead``: real sweeps of the demo space, timed from the store.

Both run :func:`searcher.search.run_study` on a copy of ``studies/demo.yaml`` in a temporary
folder (random sampler, fixed seed, no pruning, a few epochs).  The same configurations are
enqueued in every store, so one and two workers train exactly the same trials.

Divergence stops are switched off so every trial runs its planned epochs.

* ``worker_scaling``: trials per hour with 2 workers over 1, in the steady state: each
  worker's trials over its own span in the store (its first trial's start to its last one's
  end), summed over workers.  Process start-up and data generation (paid once a night) are
  left out, and so is the tail of a short sweep in which one worker has nothing left to take
  while the other finishes its last trial: over a night it is one trial in hundreds, in the
  bench's 8-24 trials it cost up to a fifth.  ``ratio_wall`` (first start to last end over
  all trials) is kept beside it, and so is ``machine_ceiling``
  (:func:`parallel_ceiling`): two processes of small tensor ops at once over one alone, the
  most this machine gives two workers whatever the code does.  Both sweeps run as fresh ``searcher run`` processes, so the one
  worker (a thread of its process) starts with a heap as small as each spawned worker's: run
  inside this process, after the other figures, it paid for their garbage (Python's
  collector walks every live object) and the ratio came out above 2 on 2 cores.
* ``overhead``: ``1 - (sum of the epoch seconds the trainer reported to MLflow) / (trial wall
  time in the store)`` over a cold and a warm pass of the same configurations: Optuna,
  storage, MLflow, the gate, the cost count, model building and the trainer's own set-up
  (collation) all count as outside.

Every sweep starts with the process's build caches and gate verdicts cleared, so one worker
(a thread here) starts as cold as spawned workers.
"""
from __future__ import annotations

import statistics
import tempfile
from pathlib import Path

import yaml

__all__ = ["sweep_study", "worker_scaling", "overhead", "fixed_params"]

ROOT = Path(__file__).resolve().parents[2]
NEVER = 1e30  # trials run their planned epochs: no divergence stop


def sweep_study(folder: Path, name: str, *, trials: int, epochs: int, workers: int,
                demo: dict | None = None) -> Path:
    """Write a copy of the demo study that runs ``trials`` unpruned trials of ``epochs``;
    ``demo`` overrides keys of ``task.demo``."""
    doc = yaml.safe_load((ROOT / "studies" / "demo.yaml").read_text())
    if demo:
        doc.setdefault("task", {})["demo"] = dict(demo)
    doc["extends"] = str(ROOT / "configs" / "flows-base.yaml")
    doc["study"]["name"] = name
    doc.setdefault("training", {})["epochs"] = int(epochs)
    doc["training"].update(schedule="constant", diverge_factor=NEVER)
    doc["search"].update(workers=int(workers), seed=0, budget={"trials": int(trials)},
                         sampler={"kind": "random", "startup": 0},
                         pruner={"kind": "none", "min_epochs": 1, "max_epochs": int(epochs)})
    doc["tracking"] = {"uri": f"sqlite:///{folder / name / 'mlflow.db'}"}
    doc["output"] = {"folder": str(folder / name)}
    path = folder / f"{name}.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return path


def fixed_params(study, k: int, seed: int = 0) -> list[dict]:
    """``k`` parameter sets drawn by Optuna's random sampler with ``seed`` (enqueued as is)."""
    import optuna

    draw = optuna.create_study(sampler=optuna.samplers.RandomSampler(seed=seed))
    out = []
    for _ in range(k):
        trial = draw.ask()
        study.suggest(trial)
        out.append(dict(trial.params))
        draw.tell(trial, 0.0)
    return out


def _run(path: Path, params: list[dict], workers: int):
    from searcher.models import clear_caches
    from searcher.search import open_store, run_study
    from searcher.spec import load_study

    # A single worker runs in a thread of this process; start it as cold as the spawned
    # workers of a multi-worker run, whatever earlier figures built here.
    clear_caches()
    study = load_study(path)
    opt = open_store(study)
    for p in params:
        opt.enqueue_trial(p)
    run_study(study, workers=workers, trials=len(params), live=False, echo=lambda *a: None)
    return study, open_store(study).get_trials(deepcopy=False)


def _run_apart(path: Path, params: list[dict], workers: int):
    """``_run`` in a fresh ``searcher run`` process; returns the stored trials."""
    import os
    import subprocess
    import sys

    from searcher.search import open_store
    from searcher.spec import load_study

    study = load_study(path)
    opt = open_store(study)
    for p in params:
        opt.enqueue_trial(p)
    env = {**os.environ, "OMP_NUM_THREADS": "1"}
    done = subprocess.run([sys.executable, "-m", "searcher", "run", str(path), "--workers",
                           str(workers), "--trials", str(len(params)), "--plain"], env=env,
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    if done.returncode != 0:
        raise RuntimeError(f"searcher run {path.name} exited {done.returncode}: "
                           f"{done.stderr[-2000:]}")
    return open_store(load_study(path)).get_trials(deepcopy=False)


def _per_hour(trials) -> float:
    """Finished trials per hour from the first start to the last end."""
    done = [t for t in trials if t.datetime_complete is not None]
    span = (max(t.datetime_complete for t in done)
            - min(t.datetime_start for t in done)).total_seconds()
    return len(done) / span * 3600.0


def _steady_per_hour(trials) -> float:
    """Sum over workers of each worker's :func:`_per_hour` (its own trials and span)."""
    by_worker: dict = {}
    for t in trials:
        if t.datetime_complete is not None:
            by_worker.setdefault((t.user_attrs.get("host"), t.user_attrs.get("pid"),
                                  t.user_attrs.get("worker")), []).append(t)
    return sum(_per_hour(ts) for ts in by_worker.values())


def _small_ops(start_at: float, steps: int) -> float:
    """Seconds for ``steps`` small-tensor steps (the size of a demo layer's ops), 1 thread,
    started at the wall time ``start_at`` so that concurrent copies overlap."""
    import time

    import torch

    torch.set_num_threads(1)
    x = torch.randn(64, 16)
    while time.time() < start_at:
        time.sleep(0.001)
    t0 = time.perf_counter()
    for _ in range(steps):
        (x * 2.0 + 1.0).sum()
    return time.perf_counter() - t0


def parallel_ceiling(steps: int = 40_000) -> float:
    """Throughput of two processes running :func:`_small_ops` at once over one alone: what
    this machine allows two workers on work shaped like ours (2.0 on two free cores)."""
    import multiprocessing as mp
    import time

    with mp.get_context("spawn").Pool(2) as pool:
        pool.apply(_small_ops, (0.0, 1000))  # both processes import torch first
        pool.apply(_small_ops, (0.0, 1000))
        alone = pool.apply(_small_ops, (time.time() + 0.2, steps))
        start = time.time() + 0.5
        both = [r.get() for r in [pool.apply_async(_small_ops, (start, steps))
                                  for _ in range(2)]]
    return 2.0 * alone / max(both)


def worker_scaling(*, trials: int, epochs: int, demo: dict | None = None,
                   folder: Path | None = None) -> dict:
    """Steady-state trials per hour with 2 workers and with 1 (see the module docstring) on
    the same enqueued demo configurations, each sweep in its own ``searcher run``."""
    with tempfile.TemporaryDirectory() as tmp:
        base = Path(folder or tmp)
        one = sweep_study(base, "scale-1", trials=trials, epochs=epochs, workers=1, demo=demo)
        two = sweep_study(base, "scale-2", trials=trials, epochs=epochs, workers=2, demo=demo)
        from searcher.spec import load_study

        params = fixed_params(load_study(one), trials)
        t1 = _run_apart(one, params, 1)
        t2 = _run_apart(two, params, 2)
        a, b = _steady_per_hour(t1), _steady_per_hour(t2)
        return {"trials": trials, "epochs": epochs, "per_hour_1": a, "per_hour_2": b,
                "ratio": b / a, "ratio_wall": _per_hour(t2) / _per_hour(t1),
                "machine_ceiling": parallel_ceiling(),
                "workers_seen": len({(t.user_attrs.get("pid"), t.user_attrs.get("worker"))
                                     for t in t2})}


def overhead(*, trials: int, epochs: int, demo: dict | None = None,
             folder: Path | None = None) -> dict:
    """Fraction of trial wall time spent outside the trainer's epochs, cold and warm.

    ``trials`` configurations run twice in one single-worker sweep (the second time with new
    trial seeds): the first pass builds and gates every architecture cold, the second finds
    them in the worker's build caches and verdict cache, as most trials of a long sweep do.
    ``fraction`` is the whole sweep's outside time over its trial time; the passes' medians
    are kept as ``fraction_cold`` and ``fraction_warm``.
    """
    from mlflow.tracking import MlflowClient

    with tempfile.TemporaryDirectory() as tmp:
        base = Path(folder or tmp)
        path = sweep_study(base, "overhead", trials=2 * trials, epochs=epochs, workers=1,
                           demo=demo)
        from searcher.spec import load_study

        params = fixed_params(load_study(path), trials)
        study, done = _run(path, params + params, 1)
        client = MlflowClient(tracking_uri=f"sqlite:///{base / 'overhead' / 'mlflow.db'}")
        rows = []
        for t in sorted(done, key=lambda t: t.number):
            run_id = t.user_attrs.get("mlflow_run_id")
            if t.datetime_complete is None or not run_id:
                continue
            wall = (t.datetime_complete - t.datetime_start).total_seconds()
            train = sum(m.value for m in client.get_metric_history(run_id, "seconds"))
            rows.append((t.number < trials, wall, train))
        walls = sum(w for _, w, _ in rows)
        inside = sum(i for _, _, i in rows)

        def median_fraction(cold: bool) -> float:
            picked = [1.0 - i / w for c, w, i in rows if c == cold]
            return statistics.median(picked) if picked else float("nan")

        return {"trials": len(rows), "epochs": epochs, "fraction": 1.0 - inside / walls,
                "fraction_cold": median_fraction(True), "fraction_warm": median_fraction(False),
                "trial_s": statistics.median(w for _, w, _ in rows),
                "training_s": statistics.median(i for _, _, i in rows),
                "outside_s": statistics.median(w - i for _, w, i in rows)}
