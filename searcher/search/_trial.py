"""One search trial: resolve, gate, guard, train, record (see :mod:`searcher.outcomes` for states).

The trial's user attributes follow the store contract in DEVELOPERS.md (``config``,
``study_hash``, ``data_hash``, ``outcome``, ``reason``, ``best_value``, ``best_epoch``,
``epochs``, ``cpu_seconds``, ``gate``, ``cost``, ``pruned_at``, ``mlflow_run_id``) plus
``config_hash``, ``seed``, ``host``, ``pid``, ``worker`` and ``sampler_seed``.  The training seed of trial ``n``
is ``training.seed + n * SEED_STRIDE`` (mod 2^31), written into the stored config so the
trial can be re-run exactly.
"""
from __future__ import annotations

import logging
import math
import os
import time
import traceback
from pathlib import Path
from typing import Callable

import optuna

from searcher.errors import UserError

from ._keep import keep_best
from ._recover import HOST
from ._registry import SEED_STRIDE
from ._store import storage_down
from ._urls import public_config

__all__ = ["TrialRunner", "TrialFailed", "TrialInterrupted", "trial_seed", "guard_check"]

log = logging.getLogger("searcher")
_FLUSH_SECONDS = 5.0


class TrialFailed(Exception):
    """Ends a trial as FAIL (outcome failed or interrupted, already recorded)."""


class TrialInterrupted(TrialFailed):
    """A signal or the deadline ended the trial at an epoch boundary."""


def trial_seed(base: int, number: int) -> int:
    """Training seed of trial ``number``."""
    return (int(base) + int(number) * SEED_STRIDE) % (2 ** 31)


def guard_check(guard: dict, params: float, madds: float) -> tuple[dict, list[str]]:
    """A candidate's size against ``search.guard``: the one rule ``run`` and ``check`` share.

    Args:
        guard: the ``search.guard`` mapping (``max_params``, ``max_cost``; 0 = no limit).
        params: trainable parameters.
        madds: estimated multiply-adds per epoch.

    Returns:
        Constraint values ``{"params", "cost"}`` (<= 0 feasible; -1 without a limit) and one
        reason per exceeded limit.
    """
    cons, reasons = {}, []
    for key, value, limit, label in (("params", params, guard["max_params"], "parameters"),
                                     ("cost", madds, guard["max_cost"], "multiply-adds/epoch")):
        limit = float(limit)
        cons[key] = float(value) / limit - 1.0 if limit > 0 else -1.0
        if cons[key] > 0:
            reasons.append(f"{float(value):.4g} {label} exceed the guard of {limit:.4g}")
    return cons, reasons


def _guard(search: dict, gate, cost) -> tuple[dict, str]:
    """Constraint values (<= 0 feasible) and the rejection reason ("" when accepted)."""
    params = float(getattr(cost, "params", 0) or getattr(gate, "params", 0))
    madds = float(getattr(cost, "madds_per_epoch", 0.0))
    sized, over = guard_check(search["guard"], params, madds)
    cons = {"gate": 0.0 if gate.passed else 1.0, **sized}
    reasons = ([] if gate.passed else [f"equivariance gate: {gate.reason}"]) + over
    return cons, "; ".join(reasons)


class TrialRunner:
    """The objective a worker hands to ``optuna.Study.optimize``.

    Args:
        study: the loaded study (``output_dir`` already set).
        dataset: the study's dataset.
        tracker: a ``Tracker`` (may be off).
        should_stop: returns True when a signal or the deadline asks workers to stop.
        worker: worker index.
        on_start: called once the trial exists (releases the budget lock).
        attrs: further user attributes set on every trial (e.g. ``sampler_seed``).
    """

    def __init__(self, study, dataset, tracker, should_stop: Callable[[], bool], worker: int,
                 on_start: Callable[[], None] = lambda: None, attrs: dict | None = None) -> None:
        self.study, self.dataset, self.tracker = study, dataset, tracker
        self.should_stop, self.worker, self.on_start = should_stop, worker, on_start
        self.attrs = dict(attrs or {})
        self.search = study.fixed()["search"]
        self.rows: list = []

    def _record(self, trial, run_id: str, outcome: str, reason: str, config, *,
                pruned_at=None, rows=None, **attrs) -> None:
        """Store the trial's end in its attributes; send the tracker the unsent metric
        ``rows`` with the end tags in one batch."""
        attrs.update(outcome=outcome, reason=reason)
        if pruned_at is not None:
            attrs["pruned_at"] = int(pruned_at)
        for key, value in attrs.items():
            trial.set_user_attr(key, value)
        self.tracker.finish(run_id, outcome=outcome, reason=reason, config=config,
                            pruned_at=pruned_at, rows=rows)

    def __call__(self, trial: optuna.Trial) -> float:
        self.on_start()
        cpu0 = time.process_time()
        for key, value in (("host", HOST), ("pid", os.getpid()), ("worker", self.worker),
                           *self.attrs.items()):
            trial.set_user_attr(key, value)
        from searcher.models import resolve_cutoff

        config = self.study.suggest(trial)
        # a data-derived cutoff is stored as its number, so the trial re-runs exactly
        config["model"] = resolve_cutoff(config["model"], self.dataset.stats["graphs"])
        seed = trial_seed(config["training"]["seed"], trial.number)
        config["training"]["seed"] = seed
        from searcher.spec import config_hash

        stored = public_config(config)
        # "config" comes after host, pid, worker and the drawn parameters: the journal is
        # synced to disk at it (_journal.SYNCED_ATTRS), so recovery can find a lost trial
        for key, value in (("config", stored), ("config_hash", config_hash(stored)),
                           ("study_hash", self.study.hash), ("data_hash", self.dataset.hash),
                           ("seed", seed)):
            trial.set_user_attr(key, value)
        run_id = self.tracker.start_trial(trial.number, config)
        trial.set_user_attr("mlflow_run_id", run_id)
        self.rows = []  # epochs' metrics the tracker has not been sent yet
        try:
            return self._train(trial, config, run_id, seed, cpu0)
        except (optuna.TrialPruned, TrialFailed):
            raise
        except UserError as err:  # the drawn combination cannot be built
            self._reject(trial, run_id, config, f"cannot build: {err}", {"gate": 1.0}, cpu0)
        except Exception as err:
            if storage_down(err):  # not the trial's fault: the worker's backoff handles it
                raise
            log.error("trial %d failed:\n%s", trial.number, traceback.format_exc())
            self._record(trial, run_id, "failed", f"{type(err).__name__}: {err}"[:2000], config,
                         cpu_seconds=time.process_time() - cpu0, rows=self.rows)
            raise TrialFailed(str(err)) from None

    def _cost_stats(self, config: dict) -> dict:
        """Graph statistics for the cost model: per-graph means, training graphs per epoch."""
        from searcher.train import fidelity_graphs

        stats = dict(self.dataset.stats.get("graphs", self.dataset.stats))
        stats["graphs"] = len(fidelity_graphs(self.dataset, config)[0])
        return stats

    def _reject(self, trial, run_id, config, reason, cons, cpu0, **attrs):
        for key, value in cons.items():
            trial.set_constraint(key, value)
        self._record(trial, run_id, "rejected", reason, config, best_value=None,
                     best_epoch=0, epochs=0, cpu_seconds=time.process_time() - cpu0, **attrs)
        raise optuna.TrialPruned(reason)

    def _train(self, trial, config, run_id, seed, cpu0) -> float:
        import torch

        from searcher.models import build_model, estimate_cost, run_gate
        from searcher.train import fit

        target = self.dataset.target.name
        graphs = self.dataset.stats["graphs"]  # degree_mean scales `aggregate: degree`
        torch.manual_seed(seed)
        model = build_model(config["model"], self.dataset.fields, target, stats=graphs)
        # The model that trains is gated, not a second build; the informative float32 error
        # and the timed probe steps are left to `searcher check --gate`: the trial's own
        # epochs measure its speed.
        gate = run_gate(config["model"], self.dataset.fields, target, seed=seed, stats=graphs,
                        built=model, float32=False)
        cost = estimate_cost(model, self._cost_stats(config), repeats=0)
        trial.set_user_attr("gate", gate.to_dict())
        trial.set_user_attr("cost", cost.to_dict())
        cons, why = _guard(self.search, gate, cost)
        if why:
            self._reject(trial, run_id, config, why, cons, cpu0)
        for key, value in cons.items():
            trial.set_constraint(key, value)

        state = {"why": "", "epoch": 0}
        last = int(config["training"]["epochs"])
        pending = self.rows
        flushed = [time.monotonic()]

        def callback(epoch: int, metrics: dict) -> bool:
            trial.report(float(metrics["val_loss"]), epoch)
            pending.append((epoch, dict(metrics)))
            if time.monotonic() - flushed[0] > _FLUSH_SECONDS:
                self.tracker.log_metrics(run_id, pending)
                pending.clear()
                flushed[0] = time.monotonic()
            if self.should_stop():
                state.update(why="interrupted", epoch=epoch)
                return True
            # The last epoch is never judged: the run is over, and Optuna's rung pruners
            # would otherwise turn a finished trial into a pruned one at their top rung.
            if epoch < last and trial.should_prune():
                state.update(why="pruned", epoch=epoch)
                return True
            return False

        result = fit(model, self.dataset, config, callback=callback)
        common = dict(best_value=result.best_value if math.isfinite(result.best_value)
                      else None, best_epoch=result.best_epoch, epochs=result.epochs,
                      cpu_seconds=time.process_time() - cpu0, rows=pending)
        if result.status == "diverged":
            trial.set_constraint("stable", 1.0)
            self._record(trial, run_id, "diverged", result.reason, config, **common)
            raise optuna.TrialPruned(result.reason)
        if result.status == "stopped" and state["why"] == "pruned":
            reason = f"pruned by the {self.search['pruner']['kind']} rule at epoch " \
                     f"{state['epoch']}"
            self._record(trial, run_id, "pruned", reason, config, pruned_at=state["epoch"],
                         **common)
            raise optuna.TrialPruned(reason)
        if result.status == "stopped":
            reason = f"stopped by a signal or the deadline after epoch {state['epoch']}"
            self._record(trial, run_id, "interrupted", reason, config, **common)
            raise TrialInterrupted(reason)
        trial.set_constraint("stable", 0.0)
        outcome = "timeout" if result.status == "timeout" else "completed"
        keep_best(trial.study.get_trials(deepcopy=False), Path(self.study.output_dir),
                  trial.number, result.best_value, result.best_state,
                  int(self.search["keep_best"]))
        self._record(trial, run_id, outcome, result.reason, config, **common)
        return float(result.best_value)
