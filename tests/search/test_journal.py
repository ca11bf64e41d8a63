"""The journal backend synced at study and trial events, against Optuna's own file backend."""
from __future__ import annotations

import json
import os

import optuna
import pytest
from optuna.storages.journal import JournalFileBackend

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
        rec.get("study_name") and rec.update(study_name="s")
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
    assert seen == [(optuna.trial.TrialState.RUNNING, "c-0", pytest.approx(seen[0][2])),
                    (optuna.trial.TrialState.RUNNING, "c-1", pytest.approx(seen[1][2]))]
    assert all(n is not None for _, _, n in seen)


def test_a_study_without_a_storage_url_writes_through_it(write_study):
    from searcher.search import make_storage
    from searcher.spec import load_study

    storage = make_storage(load_study(write_study()))
    assert isinstance(storage, optuna.storages.JournalStorage)
    assert isinstance(storage._backend, SyncedAtEvents)
