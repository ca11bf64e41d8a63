"""``searcher check``: validate a study and show what its space holds."""
from __future__ import annotations

import argparse
import json
from pathlib import Path

from searcher.errors import UserError
from searcher.spec import load_study

__all__ = ["register"]

EPILOG = """examples:
  searcher check studies/demo.yaml                  validate, count, show 3 samples
  searcher check studies/demo.yaml --samples 5 --json
  searcher check studies/demo-narrow.yaml --gate 2  also run the equivariance gate on 2 samples
"""


def _short(value) -> str:
    if isinstance(value, float):
        return f"{value:.4g}"
    if isinstance(value, list):
        return "+".join(map(str, value)) or "(none)"
    return str(value)


def _gate(study, configs: list[dict]) -> list[dict]:
    # models imports torch and e3nn; only --gate pays for that
    from searcher.cli._gating import gate_samples
    return gate_samples(study, configs)


def _limit(value, limit, spec: str) -> str:
    # a value beside its guard: "41210 / 60000", "/ -" when the guard sets no limit
    return f"{_cell(value, spec)} / {format(limit, spec) if limit else '-'}"


def _human(study, samples: list[dict], gates: list[dict]) -> None:
    derived = [d.name for d in study.dimensions if d.kind == "derived"]
    print(f"study {study.name}  ({study.path})  space {study.hash[:12]}")
    print(f"dimensions: {len(study.dimensions)} ({len(study.dimensions) - len(derived)} searched, "
          f"{len(derived)} derived)")
    print(f"discrete part: {study.discrete_size} combinations")
    for dim in study.dimensions:
        if dim.only_if:
            cond = ", ".join(f"{k} in {v}" if isinstance(v, list) else f"{k} = {v}"
                             for k, v in dim.only_if.items())
            print(f"conditional: {dim.name}  (only if {cond})")
    if not study.conditional_dimensions:
        print("conditional: none")
    for i, cfg in enumerate(samples, 1):
        shown = "  ".join(f"{k}={_short(v)}" for k, v in study.params_of(cfg).items())
        print(f"sample {i}: {shown}")
        for name in derived:
            print(f"          {name}={_short(_get(cfg, name))} (derived)")
    if gates:
        print(f"\n{'sample':>6}  {'params / guard':>17}  {'madds/epoch / guard':>21}  "
              f"{'step ms':>7}  {'trial s / limit':>15}  {'equiv. error f64':>16}  {'f32':>9}  "
              "passed  within guard  reason")
        for i, g in enumerate(gates, 1):
            guard = g["guard"]
            fit = {True: "yes", False: "NO", None: "-"}[g.get("within_guard")]
            print(f"{i:>6}  {_limit(g.get('params'), guard['max_params'], 'd'):>17}  "
                  f"{_limit(g.get('madds_per_epoch'), guard['max_cost'], '.3g'):>21}  "
                  f"{_cell(g.get('step_ms'), '.1f'):>7}  "
                  f"{_limit(g.get('trial_seconds'), guard['time_limit'], '.3g'):>15}  "
                  f"{_cell(g.get('equivariance_error'), '.3e'):>16}  "
                  f"{_cell(g.get('equivariance_error_f32'), '.2e'):>9}  "
                  f"{'yes' if g.get('passed') else 'NO':>6}  {fit:>12}  {g.get('reason', '')}")


def _check_source(study) -> None:
    # The spec does not look at the disk (a finished study can be analysed after its data
    # moved); check is where a wrong path should show, before any run.
    source = study.fixed()["task"]["source"]
    if source != "demo" and not Path(source).exists():
        raise UserError([study.locate(
            f"data source {source!r} does not exist (looked for {Path(source).resolve()}; "
            "paths are relative to the folder searcher runs in); allowed: \"demo\", a "
            ".npz/.vtu/.vtk file or a folder of them", "task.source")])


def _cell(value, spec: str) -> str:
    # a candidate that could not be built has no numbers; show a dash instead
    return "-" if value is None else format(value, spec)


def _get(cfg: dict, dotted: str):
    for part in dotted.split("."):
        cfg = cfg[part]
    return cfg


def _run(args) -> int:
    for key in ("samples", "gate"):
        if getattr(args, key) < 0:
            raise UserError.single(f"must be at least 0, but got {getattr(args, key)}",
                                   path=f"--{key}")
    try:
        study = load_study(args.study)
        _check_source(study)
    except UserError as err:
        if not args.json:
            raise
        print(json.dumps({"valid": False, "file": args.study,
                          "errors": [p.to_dict() for p in err.problems]}, indent=2))
        return 2
    seed = study.fixed()["search"]["seed"] if args.seed is None else args.seed
    # --gate K gates K candidates, drawing more than --samples when it asks for more
    samples = study.sample(max(args.samples, args.gate), seed=seed)
    gates = _gate(study, samples[:args.gate]) if args.gate else []
    if args.json:
        rows = [dict(cfg) for cfg in samples]
        for row, gate in zip(rows, gates):
            row["gate"] = gate
        print(json.dumps({"valid": True, "file": args.study, "name": study.name,
                          "hash": study.hash, "errors": [], "dimensions": len(study.dimensions),
                          "discrete_size": study.discrete_size,
                          "conditional": study.conditional_dimensions,
                          "dimension_names": [d.name for d in study.dimensions],
                          "seed": seed, "samples": rows,
                          "sample_params": [study.params_of(cfg) for cfg in samples]}, indent=2))
    else:
        _human(study, samples, gates)
    return 0


def register(sub) -> None:
    parser = sub.add_parser(
        "check", help="validate a study file and show sample candidates",
        description="Validate a study file (all problems at once, located by file:line:column) "
                    "and show its dimensions, the size of its discrete part and samples.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("study", help="the study YAML file")
    parser.add_argument("--json", action="store_true", help="one JSON object on stdout")
    parser.add_argument("--samples", type=int, default=3, metavar="K",
                        help="resolved samples to draw (default 3)")
    parser.add_argument("--seed", type=int, default=None,
                        help="sampling seed (default: the study's search.seed)")
    parser.add_argument("--gate", type=int, default=0, metavar="K",
                        help="run the equivariance gate and the cost model on K samples (the "
                             "first K; more are drawn when K exceeds --samples) and compare "
                             "their parameters, multiply-adds and step time with search.guard "
                             "and training.time_limit")
    parser.set_defaults(handler=_run)
