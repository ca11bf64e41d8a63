"""``worker_scaling`` and ``overhead``: real sweeps of the demo space, timed from the store.

Both run :func:`searcher.search.run_study` on a copy of ``studies/demo.yaml`` in a temporary
folder (random sampler, fixed seed, no pruning, a few epochs).  The same configurations are
enqueued in every store, so one and two workers train exactly the same trials.

Divergence stops are switched off so every trial runs its planned epochs.

* ``worker_scaling``: trials per hour, counted from the first trial's start to the last one's
  end in the store (process start-up and data generation, paid once a night, are left out),
  with 2 workers over 1.
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


def _per_hour(trials) -> float:
    done = [t for t in trials if t.datetime_complete is not None]
    span = (max(t.datetime_complete for t in done)
            - min(t.datetime_start for t in done)).total_seconds()
    return len(done) / span * 3600.0


def worker_scaling(*, trials: int, epochs: int, demo: dict | None = None,
                   folder: Path | None = None) -> dict:
    """Trials per hour with 2 workers and with 1 on the same enqueued demo configurations."""
    with tempfile.TemporaryDirectory() as tmp:
        base = Path(folder or tmp)
        one = sweep_study(base, "scale-1", trials=trials, epochs=epochs, workers=1, demo=demo)
        two = sweep_study(base, "scale-2", trials=trials, epochs=epochs, workers=2, demo=demo)
        from searcher.spec import load_study

        params = fixed_params(load_study(one), trials)
        _, t1 = _run(one, params, 1)
        _, t2 = _run(two, params, 2)
        a, b = _per_hour(t1), _per_hour(t2)
        return {"trials": trials, "epochs": epochs, "per_hour_1": a, "per_hour_2": b,
                "ratio": b / a}


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
