"""Many workers on one real PostgreSQL study: identical commands, stale trials, lost server.

Every process here is a real ``searcher run`` (as on separate hosts: each command is its own
process with worker index 0); the database is a real server (tests/pg_server.py).
"""
from __future__ import annotations

import signal

import pytest
from mlflow import MlflowClient
from optuna.trial import TrialState

from searcher.search import finished, outcome_of, read_store, sampler_seed
from searcher.errors import UserError
from searcher.spec import load_study
from tests.pg_server import Server, free_port

from ._procs import running_trial, start, wait_for

pytestmark = pytest.mark.slow

# node_mlp, one epoch: what is tested is the storage, not the model
FAST = {"model": {"family": "node_mlp"}, "training": {"epochs": 1},
        "search": {"pruner": {"max_epochs": 1}, "heartbeat": 1}}


def _opener(study, url):
    """``opt_of()`` for polling: one storage (one connection pool) for the whole test."""
    cache = {}

    def opt_of():
        if "opt" not in cache:
            try:
                cache["opt"] = read_store(study, url, required=False)
            except UserError:  # the first worker is still creating the tables
                cache["opt"] = None
        if cache["opt"] is None:  # not created yet
            del cache["opt"]
            raise KeyError(study.name)
        return cache["opt"]
    return opt_of


def test_sampler_seed_differs_by_origin_and_is_stable():
    # identical commands on two hosts both run worker 0: only the origin separates them
    assert sampler_seed(7, 0, "node-a:100") != sampler_seed(7, 0, "node-b:100")
    assert sampler_seed(7, 0, "node-a:100") != sampler_seed(7, 0, "node-a:101")
    assert sampler_seed(7, 0, "node-a:100") == sampler_seed(7, 0, "node-a:100")
    assert sampler_seed(7, 1) == 7 + 1_000_003  # no origin: the repeatable local rule


def test_four_identical_commands_share_one_study(write_study, pg_url):
    path = write_study({**FAST, "search": {**FAST["search"], "budget": {"trials": 100}}},
                       name="fleet")
    study = load_study(path)
    procs = [start(path, "--storage", pg_url) for _ in range(4)]
    outs = [p.communicate(timeout=600) for p in procs]
    for p, (out, err) in zip(procs, outs):
        assert p.returncode == 0 and "Traceback" not in err, err
    trials = _opener(study, pg_url)().get_trials()
    assert finished(trials) == 100 and len(trials) == 100
    assert sorted(t.number for t in trials) == list(range(100))  # no number twice
    assert all(outcome_of(t) == "completed" for t in trials)
    # four processes, four sampler seeds (host and process mixed into the study seed)
    assert len({t.user_attrs["sampler_seed"] for t in trials}) == 4
    assert len({t.user_attrs["pid"] for t in trials}) == 4
    client = MlflowClient(tracking_uri=f"sqlite:///{study.output_dir / 'mlflow.db'}")
    exp = client.get_experiment_by_name(study.name)
    parents = client.search_runs([exp.experiment_id],
                                 filter_string="tags.`searcher.role` = 'study'")
    children = client.search_runs([exp.experiment_id], max_results=1000,
                                  filter_string="tags.`searcher.role` = 'trial'")
    assert len(parents) == 1 and len(children) == 100
    by_id = {r.info.run_id: r for r in children}
    for t in trials:  # each trial's child run, under the one parent, with its number
        run = by_id[t.user_attrs["mlflow_run_id"]]
        assert run.data.tags["searcher.trial"] == str(t.number)
        assert run.data.tags["mlflow.parentRunId"] == parents[0].info.run_id


def test_killed_worker_trial_goes_stale_and_is_retried(write_study, pg_url):
    path = write_study({"model": {"family": "node_mlp"},
                        "training": {"epochs": 30, "batch_size": 1},
                        "search": {"pruner": {"max_epochs": 30}, "budget": {"trials": 3},
                                   "heartbeat": 1}}, name="stale")
    study = load_study(path)
    procs = [start(path, "--storage", pg_url) for _ in range(2)]
    opt_of = _opener(study, pg_url)
    _, lost = wait_for(running_trial(opt_of), procs, what="a trial in flight")
    victim = next(p for p in procs if p.pid == lost.user_attrs["pid"])
    victim.send_signal(signal.SIGKILL)
    victim.wait()
    survivor = next(p for p in procs if p is not victim)
    out, err = survivor.communicate(timeout=300)
    assert survivor.returncode == 0 and "Traceback" not in err, err
    trials = opt_of().get_trials()
    dead = trials[lost.number]
    assert dead.state == TrialState.FAIL and outcome_of(dead) == "interrupted"
    # retried by the heartbeat's RetryFailedTrialCallback (not by local recovery), once
    retries = [t for t in trials if t.system_attrs.get("failed_trial") == lost.number]
    assert len(retries) == 1 and retries[0].params == dead.params
    assert retries[0].state == TrialState.COMPLETE
    assert finished(trials) == 3
    assert not [t for t in trials if t.state in (TrialState.RUNNING, TrialState.WAITING)]


def test_database_lost_mid_sweep_exits_2_and_keeps_finished_trials(write_study, tmp_path):
    # its own server: stopping the shared one would break the other tests
    server = Server(free_port(), f"/tmp/searcher-pg-lost-{tmp_path.name}")
    url = server.start()
    try:
        path = write_study({**FAST, "search": {**FAST["search"],
                                                "budget": {"trials": 1000}}}, name="lost")
        study = load_study(path)
        proc = start(path, "--storage", url)
        opt_of = _opener(study, url)
        wait_for(lambda: finished(opt_of().get_trials()) >= 3, [proc], what="3 trials")
        before = {t.number: t.value for t in opt_of().get_trials() if t.state.is_finished()}
        server.halt()
        out, err = proc.communicate(timeout=120)
        assert proc.returncode == 2, err
        assert "Traceback" not in err and "s3cret-pg" not in out + err
        assert "lost" in err and "run the same command again" in err
        # down at start: a clear, located error as well
        again = start(path, "--storage", url)
        out2, err2 = again.communicate(timeout=120)
        assert again.returncode == 2 and "Traceback" not in err2
        assert "cannot open the storage" in err2 and "--storage" in err2
        assert "s3cret-pg" not in out2 + err2
        server.resume()
        trials = read_store(study, url).get_trials()
        # no finished trial was lost, none changed
        assert {t.number: t.value for t in trials if t.number in before} == before
    finally:
        server.stop()
