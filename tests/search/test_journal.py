"""The journal backend synced at study and trial events, against Optuna's own file backend."""
from __future__ import annotations

import json
import os

import optuna
import pytest
from optuna.storages.journal import JournalFileBackend
from optuna.storages.journal._storage import JournalOperation as Op

from searcher.search._journal import SYNCED_OPERATIONS, SyncedAtEvents

optuna.logging.set_verbosity(optuna.logging.WARNING)


def _objective(peek=None):
    def run(trial):
        x = trial.suggest_float("x", -1.0, 1.0)
        n = trial.suggest_int("n", 1, 4)
        for key in ("a", "b", "c"):
            trial.set_user_attr(key, f"{key}-{trial.number}")
        if peek is not None:
            peek(trial)
        for step in range(3):
            trial.report(x * x + step, step)
        trial.set_user_attr("done", True)
        return x * x + n
    return run


def _sweep(backend, trials=3, peek=None):
    store = optuna.storages.JournalStorage(backend)
    study = optuna.create_study(study_name="s", storage=store,
                                sampler=optuna.samplers.RandomSampler(seed=0))
    study.optimize(_objective(peek), n_trials=trials)
    return study


def _records(path):
    """The journal's records without the fields that differ from run to run."""
    out = []
    for line in open(path, encoding="utf-8"):
        rec = json.loads(line)
        rec.pop("worker_id", None)
        for key in ("datetime_start", "datetime_complete"):
            rec.pop(key, None)
        if "study_name" in rec:
            rec["study_name"] = "s"
        out.append(rec)
    return out


def test_file_is_optunas_format_line_for_line(tmp_path):
    # Reference: Optuna's JournalFileBackend writing the same seeded sweep.
    ours, theirs = tmp_path / "ours.journal", tmp_path / "theirs.journal"
    _sweep(SyncedAtEvents(str(ours)))
    _sweep(JournalFileBackend(str(theirs)))
    assert _records(ours) == _records(theirs)
    # and Optuna's backend reads ours back to the same trials
    back = optuna.load_study(study_name="s", storage=optuna.storages.JournalStorage(
        JournalFileBackend(str(ours))))
    ref = optuna.load_study(study_name="s", storage=optuna.storages.JournalStorage(
        JournalFileBackend(str(theirs))))
    assert [(t.params, t.values, t.user_attrs, t.intermediate_values, t.state)
            for t in back.trials] == \
           [(t.params, t.values, t.user_attrs, t.intermediate_values, t.state)
            for t in ref.trials]


def test_fsync_only_after_study_and_trial_events(tmp_path, monkeypatch):
    calls = []
    real = os.fsync
    monkeypatch.setattr(os, "fsync", lambda fd: (calls.append(fd), real(fd))[1])
    path = tmp_path / "study.journal"
    _sweep(SyncedAtEvents(str(path)), trials=3)
    ops = [json.loads(line)["op_code"] for line in open(path, encoding="utf-8")]
    synced = sum(op in SYNCED_OPERATIONS for op in ops)
    # derived from the objective: per trial 2 params, 4 attributes, 3 reports (9 records
    # flushed only) and its creation and end (2 synced); plus the study's creation
    assert len(ops) == 1 + 3 * 11
    assert len(calls) == synced == 1 + 3 * 2


def test_every_record_is_visible_to_another_reader_at_once(tmp_path):
    # A second process reading the journal (a fresh Optuna backend on the same file) sees a
    # trial's attributes while the trial still runs: written and flushed, not held back.
    path = tmp_path / "study.journal"
    seen = []

    def peek(trial):
        reader = optuna.storages.JournalStorage(JournalFileBackend(str(path)))
        live = optuna.load_study(study_name="s", storage=reader).trials[trial.number]
        seen.append((live.state, live.user_attrs.get("c"), live.params.get("n")))

    _sweep(SyncedAtEvents(str(path)), trials=2, peek=peek)
    assert [(state, attr) for state, attr, _ in seen] == \
        [(optuna.trial.TrialState.RUNNING, "c-0"), (optuna.trial.TrialState.RUNNING, "c-1")]
    assert all(n in (1, 2, 3, 4) for _, _, n in seen)  # suggest_int("n", 1, 4), already set


def test_a_study_without_a_storage_url_writes_through_it(write_study):
    from searcher.search import make_storage
    from searcher.spec import load_study

    storage = make_storage(load_study(write_study()))
    assert isinstance(storage, optuna.storages.JournalStorage)
    assert isinstance(storage._backend, SyncedAtEvents)


def test_a_searcher_trial_is_on_disk_with_what_recovery_needs_before_it_trains(
        write_study, monkeypatch):
    # Recovery (search/_recover.py) finds a lost RUNNING trial by its host and pid attributes
    # and queues its parameters again: those records must be synced before the trial's first
    # epoch, or a power cut during training would leave a trial nobody can recover.
    from searcher.search import run_study
    from searcher.spec import load_study

    study = load_study(write_study(name="synced"))
    path = study.output_dir / "study.journal"
    synced_at = []
    real = os.fsync

    def counting(fd):
        real(fd)
        synced_at.append(sum(1 for _ in open(path, "rb")))

    monkeypatch.setattr(os, "fsync", counting)
    run_study(study, live=False, echo=lambda *_: None)
    records = [json.loads(line) for line in open(path, encoding="utf-8")]
    trials = {}
    for n, rec in enumerate(records, 1):
        if rec["op_code"] == Op.CREATE_TRIAL:  # trial ids count from 0 in creation order
            trials[len(trials)] = {"needed": n, "first_epoch": None}
        tid = rec.get("trial_id")
        if tid is None or tid not in trials:
            continue
        keys = set(rec.get("user_attr", {})) | ({rec["param_name"]} if "param_name" in rec
                                                else set())
        if keys & {"host", "pid", "worker", "config"} or rec["op_code"] == Op.SET_TRIAL_PARAM:
            trials[tid]["needed"] = n
        if rec["op_code"] == Op.SET_TRIAL_INTERMEDIATE_VALUE and trials[tid]["first_epoch"] is None:
            trials[tid]["first_epoch"] = n
    assert trials and all(t["first_epoch"] for t in trials.values())
    for t in trials.values():
        assert any(t["needed"] <= s < t["first_epoch"] for s in synced_at)
