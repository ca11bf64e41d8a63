"""scripts/bench pieces on tiny sizes: every figure is produced (no timing is asserted)."""
from __future__ import annotations

import copy

import pytest
import torch

from searcher.bench import (GOALS, format_table, loop_vs_reference, reference_module,
                            run_bench, sized_config)
from searcher.bench._suite import _demo
from searcher.models import build_model
from searcher.train import fidelity_graphs, fit

TINY_DEMO = {"samples": 8, "probes": 12}
TINY_PLAN = {"sizes": (1,), "families": ("gated",), "epochs": 1, "repeats": 1,
             "flop_steps": 1, "scale_trials": 2, "scale_epochs": 1, "overhead_trials": 2,
             "overhead_epochs": 1, "analysis_n": 200, "demo": TINY_DEMO}


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return _demo(tmp_path_factory.mktemp("cache"), TINY_DEMO)


def test_reference_loop_does_the_same_work(demo):
    # Same initial weights, same graphs, same seeded batches and Adam settings: the
    # hand-written loop on the plain-e3nn build and fit on the fused build must agree on the
    # validation curve (common practice for a fair side-by-side timing: both sides compute
    # the same thing; the kernels sum in another order, hence rel 1e-4, not equality).
    dataset, base = demo
    cfg = sized_config(base, "gated", 1, 2)
    cfg["model"]["hidden"]["multiplicity"] = 2
    torch.manual_seed(0)
    model = build_model(cfg["model"], dataset.fields, dataset.target.name)
    plain = build_model(cfg["model"], dataset.fields, dataset.target.name, kernels="e3nn")
    init = copy.deepcopy(model.state_dict())
    ours = fit(model, dataset, cfg).curve
    plain.load_state_dict(init)
    train, val = fidelity_graphs(dataset, cfg)
    t = cfg["training"]
    theirs = reference_module().train(
        plain, train, val, dataset.target.name, epochs=2, batch_size=t["batch_size"],
        learning_rate=t["learning_rate"], clip=t["clip"], seed=t["seed"])
    assert theirs == pytest.approx(ours, rel=1e-4)


def test_loop_ratio_rows(demo):
    dataset, base = demo
    rows = loop_vs_reference(dataset, base, sizes=(1,), families=("gated",), epochs=1,
                             repeats=1)
    # derived: the one family and size asked for
    assert [(r["family"], r["lmax"]) for r in rows] == [("gated", 1)]
    assert set(rows[0]) == {"family", "lmax", "epochs", "kernel", "ours_s", "reference_s",
                            "fallback_s", "ratio", "ratio_fallback", "compiled_vs_fallback"}
    r = rows[0]
    # derived: each ratio is the quotient of the medians it names
    assert r["ratio"] == pytest.approx(r["reference_s"] / r["ours_s"])
    assert r["compiled_vs_fallback"] == pytest.approx(r["fallback_s"] / r["ours_s"])


def test_kernel_cost_figure(demo):
    # The per-structure tables of every distinct fusable product of the asked models; the
    # cold build (a child process, ~40 s) is the full bench's job, so it is skipped here.
    from searcher.bench._kernels import kernel_cost

    dataset, base = demo
    cost = kernel_cost(dataset, base, sizes=(1,), families=("gated",), cold_build=False)
    assert cost["structures"] >= 1 and cost["tables_ms_max"] >= cost["tables_ms_median"] > 0
    assert "build_s" not in cost and cost["imports_s"] > 0
    table = format_table({"figures": {"kernel_cost": cost}, "mode": "quick",
                          "machine": {"nproc": 1, "cpu": "x", "torch": "t", "e3nn": "e",
                                      "threads": 1}})
    assert "kernel_cost" in table and cost["status"] in table


def test_in_process_figures_and_table(tmp_path):
    record = run_bench(quick=True, cache=tmp_path, plan=TINY_PLAN, echo=lambda line: None,
                       only=("loop_vs_reference", "flop_utilisation", "analysis_10k"))
    figs = record["figures"]
    assert set(figs) == {"loop_vs_reference", "flop_utilisation", "analysis_10k"}
    flop = figs["flop_utilisation"][0]
    # derived: a share of the machine's peak is positive for any model that does work
    assert flop["madds_per_step"] > 0 and 0 < flop["fraction"] and 0 < flop["fraction_e3nn"]
    table = format_table(record)
    for name in figs:
        assert name in table
    assert record["machine"]["nproc"] >= 1 and record["machine"]["torch"] == torch.__version__


@pytest.mark.slow
def test_sweep_figures(tmp_path):
    record = run_bench(quick=True, cache=tmp_path, plan=TINY_PLAN, echo=lambda line: None,
                       only=("worker_scaling", "overhead"))
    scale, over = record["figures"]["worker_scaling"], record["figures"]["overhead"]
    assert scale["per_hour_1"] > 0 and scale["per_hour_2"] > 0  # derived: trials did finish
    assert scale["ratio_wall"] > 0 and scale["machine_ceiling"] > 0  # derived: both ran
    # 2 configurations, each run once cold and once warm.
    assert over["trials"] == 4 and 0 <= over["fraction"] <= 1  # derived: 2 x (cold + warm); a share
    assert 0 <= over["fraction_warm"] <= 1 and 0 <= over["fraction_cold"] <= 1  # shares (derived)
    # The trainer's logged epoch seconds are part of the trial's wall time, never more.
    assert 0 < over["training_s"] <= over["trial_s"]
    table = format_table(record)
    assert all(name in table for name in ("worker_scaling", "overhead"))
    assert set(GOALS) >= set(record["figures"])


@pytest.mark.slow
def test_kernel_routes_figure(demo):
    # One structure, both processes (cold and warm inductor cache); the times are positive
    # and the warm first call skips inductor's compile, so it is shorter (derived: the cache
    # holds the compiled code).
    from searcher.bench._routes import kernel_routes

    dataset, base = demo
    fig = kernel_routes(dataset, base, count=1)
    (row,) = fig["rows"]
    assert fig["edges"] > 0 and row["fallback_us"] > 0 and row["inductor_us"] > 0
    assert row["inductor_warm_first_call_s"] < row["inductor_first_call_s"]


def test_steady_rate_counts_each_worker_over_its_own_span():
    # derived by hand: worker A runs 3 trials in 0-6 s (1800/h), worker B 2 trials in 1-5 s
    # (1800/h) and then has nothing to take; the steady rate is 3600/h, the wall rate
    # (5 trials over 0-6 s) 3000/h.
    import datetime

    import optuna

    from searcher.bench._sweep import _per_hour, _steady_per_hour

    t0 = datetime.datetime(2026, 1, 1)

    def trial(pid, start, end):
        made = optuna.trial.create_trial(value=0.0, user_attrs={"host": "h", "pid": pid,
                                                                "worker": 0})
        made.datetime_start = t0 + datetime.timedelta(seconds=start)
        made.datetime_complete = t0 + datetime.timedelta(seconds=end)
        return made

    trials = [trial(1, 0, 2), trial(1, 2, 4), trial(1, 4, 6), trial(2, 1, 3), trial(2, 3, 5)]
    assert _steady_per_hour(trials) == pytest.approx(3600.0)
    assert _per_hour(trials) == pytest.approx(3000.0)
