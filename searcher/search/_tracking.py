"""MLflow tracking: one parent run per study, one nested child run per trial.

Parent: tags ``searcher.role=study`` and ``searcher.study=<name>`` (found again on resume).
Child: tags ``mlflow.parentRunId``, ``searcher.role=trial``, ``searcher.trial=<number>``;
params = the flattened resolved config (dotted keys, values as text, at most 500 characters,
passwords masked); metrics per epoch (step = epoch); at the end tags ``searcher.outcome``,
``searcher.reason``, ``searcher.pruned_at`` and the config as YAML in ``searcher.config`` (as
the artifact ``config.yaml`` when it is longer than a tag may be).  The tag names are the
contract's (:data:`searcher.outcomes.TAGS`).

Writes are batched: a run is created with its tags, and its params, metrics and end tags
go in one ``log_batch`` when it finishes (split only at MLflow's limits per call), then it is
closed.  Every MLflow call costs 3-6 ms of CPU on sqlite whatever it carries, so a small trial
makes three calls, not seven.  A caller that flushes curves during a long run (the trial
runner does every few seconds) sends the params with the first flush.

Several workers (and several ``searcher run`` processes on one machine) write one sqlite file
at once, so every call is retried with backoff when sqlite says the database is locked.  Any other tracking failure (a bad URI, a server that is
down) gives one warning and switches tracking off for that process: the Optuna store, which
holds everything analysis needs, is never held up by the tracker.
"""
from __future__ import annotations

import contextlib
import logging
import os
import random
import time
from dataclasses import dataclass
from pathlib import Path

import yaml

from searcher.outcomes import STUDY_ROLE, TAGS, TRIAL_ROLE
from searcher.spec import flatten as flatten_config

from ._urls import mask_url, public_config, tracking_uri

__all__ = ["Tracker", "TrackingInfo", "prepare_tracking", "find_study_run", "flatten"]

# libyaml's emitter where PyYAML has it: the same YAML as yaml.safe_dump, 4x faster (2 ms
# -> 0.45 ms for a demo config, a trial's largest tag)
_DUMPER = getattr(yaml, "CSafeDumper", yaml.SafeDumper)
log = logging.getLogger("searcher")
_MAX_ITEMS = 1000       # MLflow's limits per log_batch: entities in all,
_MAX_PARAMS = 100       # params and tags together
_PARAM_CHARS = 500
_TAG_CHARS = 8000       # MLflow's longest tag value
_TRIES = 10


@dataclass(frozen=True)
class TrackingInfo:
    """What a worker needs to log into the study's parent run (picklable)."""

    uri: str
    experiment_id: str
    parent_run_id: str
    study: str


def flatten(config: dict) -> dict[str, str]:
    """``{"a": {"b": 1}}`` → ``{"a.b": "1"}``: MLflow params (values as text, at most 500
    characters)."""
    return {k: str(v)[:_PARAM_CHARS] for k, v in flatten_config(config).items()}


def _quiet() -> None:
    import mlflow  # noqa: F401  (mlflow sets up its loggers on import; quieten them after)

    for name in ("mlflow", "alembic", "sqlalchemy"):
        logging.getLogger(name).setLevel(logging.WARNING)


def _locked(err: Exception) -> bool:
    return "locked" in str(err).lower() or "busy" in str(err).lower()


class Tracker:
    """MLflow client wrapper that retries lock errors and never raises.

    Args:
        info: where to log; ``None`` means tracking is off.
    """

    def __init__(self, info: TrackingInfo | None) -> None:
        self.info = info
        self.client = None
        self._unsent: dict = {}  # run id -> params not yet written
        if info is not None:
            _quiet()
            try:
                from mlflow import MlflowClient

                self.client = MlflowClient(tracking_uri=info.uri)
            except Exception as err:  # bad URI scheme, missing plugin, ...
                self._off(err)

    @property
    def on(self) -> bool:
        return self.client is not None

    def _off(self, err: Exception) -> None:
        uri = mask_url(self.info.uri) if self.info else ""
        log.warning("tracking to %s is off for this worker: %s: %s (the Optuna store keeps "
                    "every result)", uri, type(err).__name__, mask_url(str(err)).splitlines()[0]
                    if str(err) else "")
        self.client = None

    def call(self, method: str, *args, **kwargs):
        """``client.<method>(*args, **kwargs)``, retried on lock errors; None on failure."""
        if self.client is None:
            return None
        for attempt in range(_TRIES):
            try:
                return getattr(self.client, method)(*args, **kwargs)
            except Exception as err:
                if _locked(err) and attempt < _TRIES - 1:
                    time.sleep(min(2.0, 0.05 * 2 ** attempt) * (1 + random.random()))
                    continue
                self._off(err)
                return None
        return None

    def start_run(self, run_name: str, tags: dict, config: dict) -> str:
        """Create a child run of the study run with ``tags``; the config's params go with its
        first batch of metrics or with :meth:`finish`.  Returns its run id ("" when
        tracking is off)."""
        if not self.on:
            return ""
        info = self.info
        run = self.call("create_run", info.experiment_id, run_name=run_name, tags={
            "mlflow.parentRunId": info.parent_run_id, TAGS["study"]: info.study, **tags})
        if run is None:
            return ""
        from mlflow.entities import Param

        self._unsent[run.info.run_id] = [Param(k, v) for k, v in
                                         flatten(public_config(config)).items()]
        return run.info.run_id

    def start_trial(self, number: int, config: dict) -> str:
        """Create the child run of trial ``number``; returns its run id ("" when off)."""
        return self.start_run(f"trial-{number:04d}", {TAGS["role"]: TRIAL_ROLE,
                                                      TAGS["trial"]: str(number)}, config)

    def _send(self, run_id: str, rows=(), tags: dict | None = None) -> None:
        """One ``log_batch`` with the run's unsent params, ``rows`` of metrics and ``tags``,
        split at MLflow's limits."""
        from mlflow.entities import Metric, RunTag

        now = int(time.time() * 1000)
        params = self._unsent.pop(run_id, [])
        metrics = [Metric(k, float(v), now, int(epoch)) for epoch, m in rows for k, v in m.items()]
        marks = [RunTag(k, v) for k, v in (tags or {}).items()]
        for p, m, t in _chunks(params, metrics, marks):
            self.call("log_batch", run_id, metrics=m, params=p, tags=t)

    def log_metrics(self, run_id: str, rows: list[tuple[int, dict]]) -> None:
        """Send ``[(epoch, {name: value})]`` now (with the run's params, the first time)."""
        if not (self.on and run_id and rows):
            return
        self._send(run_id, rows)

    def finish(self, run_id: str, *, outcome: str, reason: str, config: dict | None,
               pruned_at: int | None = None, extra_tags: dict | None = None,
               rows: list[tuple[int, dict]] | None = None) -> None:
        """Write what is left (params, ``rows`` of metrics, the outcome tags and the config)
        in one batch and close the run."""
        if not (self.on and run_id):
            self._unsent.pop(run_id, None)
            return
        tags = {TAGS["outcome"]: outcome, TAGS["reason"]: mask_url(reason)[:5000]}
        if pruned_at is not None:
            tags[TAGS["pruned_at"]] = str(pruned_at)
        tags.update(extra_tags or {})
        text = (yaml.dump(public_config(config), Dumper=_DUMPER, sort_keys=False)
                if config is not None else "")
        if text and len(text) <= _TAG_CHARS:
            tags[TAGS["config"]] = text
        self._send(run_id, rows or (), tags)
        if text and len(text) > _TAG_CHARS:
            self.call("log_text", run_id, text, "config.yaml")
        status = {"interrupted": "KILLED", "failed": "FAILED"}.get(outcome, "FINISHED")
        self.call("set_terminated", run_id, status=status)


def _chunks(params: list, metrics: list, tags: list):
    """``(params, metrics, tags)`` per ``log_batch`` call within MLflow's limits: at most
    100 params and tags together and 1000 entities in all; tags once the params are out."""
    params, metrics, tags = list(params), list(metrics), list(tags)
    while True:
        p = params[:_MAX_PARAMS]
        del params[:len(p)]
        t = tags[:_MAX_PARAMS - len(p)] if not params else []
        del tags[:len(t)]
        m = metrics[:_MAX_ITEMS - len(p) - len(t)]
        del metrics[:len(m)]
        if p or m or t:
            yield p, m, t
        if not (params or metrics or tags):
            return


def find_study_run(tracker: Tracker, experiment_id: str, study: str):
    """The oldest parent run of ``study`` in the experiment, or None."""
    runs = tracker.call(
        "search_runs", [experiment_id], filter_string=f"tags.`{TAGS['role']}` = '{STUDY_ROLE}' "
        f"and tags.`{TAGS['study']}` = '{study}'", order_by=["attributes.start_time ASC"],
        max_results=1)
    return runs[0] if runs else None


@contextlib.contextmanager
def _schema_lock(uri: str):
    """Serialise set-up between processes that share one sqlite tracking file.

    MLflow creates the sqlite schema on first use; several ``searcher run`` commands
    started at once on one machine would race on it (and on creating the parent run).
    """
    if not uri.startswith("sqlite:///"):
        yield
        return
    import fcntl

    lock = Path(uri[len("sqlite:///"):] + ".lock")
    lock.parent.mkdir(parents=True, exist_ok=True)
    with open(lock, "a") as handle:
        fcntl.flock(handle, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)


def prepare_tracking(study, config: dict, output_dir: Path) -> TrackingInfo | None:
    """Create (or find) the experiment and the study's parent run; None when unreachable.

    Called once by each ``searcher run`` process before it starts its workers, so that
    creating the sqlite schema never races between workers.  Processes on other hosts that
    share a tracking server may create a parent run at the same moment: each then keeps the
    oldest one and deletes its own, so all children hang under one parent.
    """
    _quiet()
    uri = tracking_uri(config["tracking"]["uri"], output_dir)
    # Fail fast on an unreachable server instead of MLflow's minutes of HTTP retries.
    os.environ.setdefault("MLFLOW_HTTP_REQUEST_MAX_RETRIES", "0")
    os.environ.setdefault("MLFLOW_HTTP_REQUEST_TIMEOUT", "10")
    with _schema_lock(uri):
        return _prepare(study, config, output_dir, uri)


def _prepare(study, config: dict, output_dir: Path, uri: str) -> TrackingInfo | None:
    name = config["tracking"]["experiment"] or study.name
    probe = Tracker(TrackingInfo(uri, "", "", study.name))
    if not probe.on:
        return None
    exp = probe.call("get_experiment_by_name", name)
    if probe.on and exp is None:
        artifacts = None
        if uri.startswith("sqlite:") and not config["tracking"]["uri"] \
                and not os.environ.get("MLFLOW_TRACKING_URI"):
            artifacts = (Path(output_dir) / "artifacts").resolve().as_uri()
        exp_id = probe.call("create_experiment", name, artifact_location=artifacts)
        if exp_id is None and probe.on:
            exp = probe.call("get_experiment_by_name", name)  # created by a rival meanwhile
            exp_id = exp.experiment_id if exp else None
    else:
        exp_id = exp.experiment_id if exp else None
    if not probe.on or exp_id is None:
        return None
    parent = find_study_run(probe, exp_id, study.name)
    if parent is None and probe.on:
        parent = probe.call("create_run", exp_id, run_name=f"study-{study.name}", tags={
            TAGS["role"]: STUDY_ROLE, TAGS["study"]: study.name,
            TAGS["study_hash"]: study.hash, TAGS["summary"]:
            str(config["study"]["summary"])[:500]})
        oldest = find_study_run(probe, exp_id, study.name) if parent is not None else None
        if oldest is not None and oldest.info.run_id != parent.info.run_id:
            probe.call("delete_run", parent.info.run_id)  # a rival host was first
            parent = oldest
    if parent is None:
        return None
    return TrackingInfo(uri, str(exp_id), parent.info.run_id, study.name)
