"""``scripts/bench``: every figure measured side by side in one run, a table printed last.

Sizes per mode (``quick`` keeps the whole run near 3 minutes on 2 cores, the full run under
20): see :data:`PLANS`; ``demo`` overrides keys of ``task.demo`` of the demo study (tests
use a few small graphs).  Goals are those of the speed issue; the table marks each figure
``met`` or ``missed`` against its goal, and ``--json`` keeps every measured number.
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import sys
import time
import warnings
from pathlib import Path

from ._census import DEEP_DECADES, SHARE_GOAL, census
from ._pruners import bench_pruners, format_bench_pruners

__all__ = ["PLANS", "GOALS", "machine", "run_bench", "format_table", "main"]

PLANS = {
    "quick": {"sizes": (1, 2, 3), "families": ("steerable",), "epochs": 2, "repeats": 3,
              "flop_steps": 5, "scale_trials": 8, "scale_epochs": 4, "overhead_trials": 3,
              "overhead_epochs": 4, "analysis_n": 10_000, "census_n": 24, "demo": {},
              "patch_sizes": (100_000, 300_000), "route_count": 1},
    "full": {"sizes": (1, 2, 3), "families": ("steerable", "gated"), "epochs": 4, "repeats": 5,
             "flop_steps": 20, "scale_trials": 24, "scale_epochs": 12, "overhead_trials": 8,
             "overhead_epochs": 6, "analysis_n": 10_000, "census_n": 60, "demo": {},
             "patch_sizes": (100_000, 300_000, 1_000_000), "route_count": 2},
}
# figure -> (comparison, goal)
GOALS = {"loop_vs_reference": (">=", 2.0), "flop_utilisation": (">=", 0.25),
         "worker_scaling": (">=", 1.8), "overhead": ("<=", 0.05), "analysis_10k": ("<=", 30.0),
         # seconds of the one cold build per machine: reported, no goal
         "kernel_cost": (None, None),
         # the C++ kernel against torch.compile per structure: reported, no goal
         "kernel_routes": (None, None),
         # the census has two goals: share in SHARE_GOAL and this gap (see _census.py)
         "census": (">=", DEEP_DECADES),
         # peak resident GiB of surveying the largest patched file (data inspect)
         "patches": ("<=", 3.0)}


def machine() -> dict:
    """CPU count and model, torch and e3nn versions, torch threads, thread variables."""
    import e3nn
    import torch

    model = ""
    try:
        model = next((line.split(":", 1)[1].strip() for line in
                      Path("/proc/cpuinfo").read_text().splitlines()
                      if line.startswith("model name")), "")
    except OSError:
        pass
    return {"nproc": os.cpu_count(), "affinity": len(os.sched_getaffinity(0)),
            "cpu": model or platform.processor(), "python": platform.python_version(),
            "torch": torch.__version__, "e3nn": e3nn.__version__,
            "threads": torch.get_num_threads(),
            "env": {k: os.environ.get(k, "") for k in ("OMP_NUM_THREADS", "MKL_NUM_THREADS")}}


def _demo(cache: Path, demo: dict):
    from searcher.data import build_dataset
    from searcher.spec import load_study

    from ._loop import ROOT

    cfg = load_study(ROOT / "studies" / "demo.yaml").fixed()
    cfg["task"]["demo"].update(demo)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        return build_dataset(cfg["task"], cache_dir=cache), cfg


def run_bench(*, quick: bool, cache: Path, only: tuple[str, ...] = (), plan: dict | None = None,
              echo=print) -> dict:
    """Measure every figure (or those in ``only``); returns the JSON-ready record.

    Args:
        quick: the quick plan (else the full one).
        cache: folder for the demo dataset cache.
        only: figure names to run (all when empty); ``pruners`` is one of them.
        plan: sizes overriding :data:`PLANS` (tests use tiny ones).
        echo: progress lines.
    """
    import torch

    from ._kernels import kernel_cost
    from ._routes import kernel_routes
    from ._loop import flop_utilisation, loop_vs_reference
    from ._sweep import overhead, worker_scaling

    torch.set_num_threads(1)  # the workers' setting: the figures describe one worker
    plan = {**PLANS["quick" if quick else "full"], **(plan or {})}
    want = set(only) or {*GOALS, "pruners"}
    record = {"mode": "quick" if quick else "full", "machine": machine(), "plan": plan,
              "figures": {}, "seconds": {}}
    dataset, base = _demo(cache, plan["demo"])
    steps = {
        "loop_vs_reference": lambda: loop_vs_reference(
            dataset, base, sizes=plan["sizes"], families=plan["families"],
            epochs=plan["epochs"], repeats=plan["repeats"]),
        "flop_utilisation": lambda: flop_utilisation(dataset, base, sizes=plan["sizes"],
                                                     steps=plan["flop_steps"]),
        "worker_scaling": lambda: worker_scaling(trials=plan["scale_trials"],
                                                 epochs=plan["scale_epochs"],
                                                 demo=plan["demo"]),
        "overhead": lambda: overhead(trials=plan["overhead_trials"],
                                     epochs=plan["overhead_epochs"], demo=plan["demo"]),
        "kernel_cost": lambda: kernel_cost(dataset, base, sizes=plan["sizes"],
                                           families=plan["families"]),
        "kernel_routes": lambda: kernel_routes(dataset, base, count=plan["route_count"]),
        "analysis_10k": lambda: {"n": plan["analysis_n"], "seconds": _analysis(plan)},
        "pruners": lambda: bench_pruners(quick),
        "census": lambda: census(_loop_root() / "studies" / "demo.yaml", int(plan["census_n"])),
        "patches": lambda: _patches(plan),
    }
    for name, step in steps.items():
        if name not in want:
            continue
        echo(f"bench: {name} ...")
        start = time.perf_counter()
        record["figures"][name] = step()
        record["seconds"][name] = time.perf_counter() - start
    return record


def _loop_root() -> Path:
    from ._loop import ROOT

    return ROOT


def _analysis(plan: dict) -> float:
    from ._analysis import bench_analysis_10k

    return bench_analysis_10k(n=int(plan["analysis_n"]))


def _patches(plan: dict) -> dict:
    from ._patches import bench_patches

    return bench_patches(tuple(int(n) for n in plan["patch_sizes"]))


def _headline(name: str, value) -> tuple[str, float | None]:
    """(detail, value compared with the goal) of one figure."""
    if name == "loop_vs_reference":
        parts = [f"{r['family']} l{r['lmax']} {r['ratio']:.2f} (fallback "
                 f"{r['ratio_fallback']:.2f})" for r in value]
        return ", ".join(parts) + f"; kernel: {value[0]['kernel']}", \
            min(r["ratio"] for r in value)
    if name == "flop_utilisation":
        parts = [f"l{r['lmax']} {r['fraction']:.3f} (fallback {r['fraction_fallback']:.3f}, "
                 f"e3nn {r['fraction_e3nn']:.3f})" for r in value]
        return ", ".join(parts) + f"; {value[0]['edges']} edges a batch", \
            max(r["fraction"] for r in value)
    if name == "kernel_routes":
        parts = [f"{r['structure']}: fallback {r['fallback_us']:.0f} us, compiled "
                 f"{r.get('compiled_us', float('nan')):.0f} us, inductor {r['inductor_us']:.0f} "
                 f"us after a first call of {r['inductor_first_call_s']:.1f} s cold, "
                 f"{r['inductor_warm_first_call_s']:.1f} s warm" for r in value["rows"]]
        return "; ".join(parts) + f" ({value['edges']} edges)", None
    if name == "kernel_cost":
        if "build_s" not in value:
            return f"kernel: {value['status']}", None
        return (f"cold build {value['build_s']:.1f} s once per machine (imports "
                f"{value['imports_s']:.1f} s of it), cached load {value['load_s']:.1f} s; "
                f"tables {value['tables_ms_median']:.2f} ms a structure (max "
                f"{value['tables_ms_max']:.2f}, {value['structures']} structures); "
                f"{value['child_status']}", value["build_s"])
    if name == "worker_scaling":
        return (f"{value['per_hour_2']:.0f} vs {value['per_hour_1']:.0f} trials/h steady "
                f"(first start to last end {value['ratio_wall']:.2f}); this machine's "
                f"ceiling for two processes {value['machine_ceiling']:.2f}", value["ratio"])
    if name == "overhead":
        return (f"cold pass {value['fraction_cold']:.2f}, warm pass "
                f"{value['fraction_warm']:.2f}; {value['outside_s']:.2f} s outside of "
                f"{value['trial_s']:.2f} s a trial (median)", value["fraction"])
    if name == "analysis_10k":
        return f"{value['n']} trials", value["seconds"]
    if name == "census":
        return (f"{value['share']:.0%} of {value['configs']} configs >= {DEEP_DECADES} decades "
                f"below the median 10^{value['median']:.2f} (goal {SHARE_GOAL[0]:.0%}-"
                f"{SHARE_GOAL[1]:.0%}); good group of {len(value['good_group']['configs'])}",
                value["gap_decades"])
    if name == "patches":
        rows = [f"{r['nodes']:.0e} nodes {r['seconds']:.1f} s {r['peak_mib']:.0f} MiB "
                f"(+{r['above_floor_mib']:.0f} over imports; {r['patches']} patches, cover "
                f"{'exact' if r['core_cover_exact'] else 'WRONG'})" for r in value["rows"]]
        build = value.get("build")
        if build:
            rows.append(f"full build at {build['nodes']:.0e}: {build['ratio_peak']:.2f}x the "
                        f"peak (+{build['above_floor_mib']:.0f} MiB over imports), "
                        f"{build['ratio_seconds']:.2f}x the time")
        train = value.get("train")
        if train:
            rows.append(f"one epoch of training at {train['nodes']:.0e} ({train['status']}; "
                        f"{train['train_patches']} patches, {train['train_nodes']} nodes held): "
                        f"{train['peak_mib']:.0f} MiB (+{train['above_floor_mib']:.0f} over "
                        f"imports), {train['ratio_peak']:.2f}x the survey's peak")
        return "; ".join(rows) + f"; imports alone {value['floor_mib']:.0f} MiB", \
            value["peak_gib"]
    return "", None


def format_table(record: dict) -> str:
    """The closing table: figure, value, goal, verdict, detail."""
    rows = [("figure", "value", "goal", "verdict", "detail")]
    for name, value in record["figures"].items():
        if name == "pruners" or value is None:
            continue
        detail, number = _headline(name, value)
        op, goal = GOALS[name]
        if op is None or number is None:
            rows.append((name, "-" if number is None else f"{number:.3g}", "-", "-", detail))
            continue
        met = value["met"] if name == "census" else (number >= goal if op == ">=" else
                                                     number <= goal)
        rows.append((name, f"{number:.3g}", f"{op} {goal:g}", "met" if met else "missed",
                     detail))
    widths = [max(len(r[k]) for r in rows) for k in range(5)]
    lines = ["  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() for r in rows]
    lines.insert(1, "  ".join("-" * w for w in widths))
    m = record["machine"]
    lines.append(f"machine: {m['nproc']} CPUs ({m['cpu']}), torch {m['torch']}, e3nn "
                 f"{m['e3nn']}, {m['threads']} torch thread(s); mode {record['mode']}")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    """``scripts/bench [--quick] [--json OUT] [--only NAME ...]``."""
    parser = argparse.ArgumentParser(prog="scripts/bench",
                                     description="Speed figures measured side by side.")
    parser.add_argument("--quick", action="store_true", help="about 3 minutes instead of 20")
    parser.add_argument("--json", metavar="OUT", help="write every figure to this file")
    parser.add_argument("--only", nargs="+", choices=[*GOALS, "pruners"], default=(),
                        help="run only these figures")
    parser.add_argument("--cache", default="runs/bench-cache", help="demo dataset cache")
    args = parser.parse_args(argv)
    record = run_bench(quick=args.quick, cache=Path(args.cache), only=tuple(args.only),
                       echo=lambda line: print(line, file=sys.stderr, flush=True))
    if "pruners" in record["figures"]:
        print(format_bench_pruners(record["figures"]["pruners"]))
        print()
    print(format_table(record))
    if args.json:
        Path(args.json).parent.mkdir(parents=True, exist_ok=True)
        Path(args.json).write_text(json.dumps(record, indent=1, default=str))
    return 0
