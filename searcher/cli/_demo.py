"""``searcher demo``: the whole job on the embedded analytic-flow demo.

It writes a small study file into the output folder that extends ``studies/demo.yaml``
(``--quick`` shrinks the budget, data and epochs), runs it with 2 workers and the demo's
pruner, then the analysis and the dossier, and prints where everything is.
"""
from __future__ import annotations

import argparse
import time
from pathlib import Path

import yaml

from searcher.errors import UserError, ensure_folder

__all__ = ["register", "demo_study_text", "QUICK"]

# --quick: fewer, shorter trials on fewer, smaller graphs (about a third of the full demo).
QUICK = {"study": {"name": "demo-quick"},
         "task": {"demo": {"samples": 48}},
         "training": {"epochs": 15},
         "search": {"budget": {"trials": 16},
                    "pruner": {"min_epochs": 2, "max_epochs": 15}}}


def _demo_file() -> Path:
    import searcher

    path = Path(searcher.__file__).resolve().parents[1] / "studies" / "demo.yaml"
    if not path.exists():
        raise UserError.single(f"the demo study must exist next to the package, but {path} "
                               f"does not")
    return path


def demo_study_text(out: Path, quick: bool) -> str:
    """The study file the demo runs: ``studies/demo.yaml`` plus the output folder (and the
    ``--quick`` overrides)."""
    doc = {"extends": str(_demo_file())}
    if quick:
        doc.update(QUICK)
    doc["output"] = {"folder": str(out)}
    return "# written by `searcher demo`; edit studies/demo.yaml instead\n" + \
        yaml.safe_dump(doc, sort_keys=False)


def _handle(args: argparse.Namespace) -> int:
    from searcher.analysis import analyze
    from searcher.report import make_dossier
    from searcher.search import open_store, run_study
    from searcher.spec import load_study

    from ._run import where_lines

    t0 = time.perf_counter()
    out = Path(args.out or ("runs/demo-quick" if args.quick else "runs/demo")).resolve()
    ensure_folder(out, "--out" if args.out else "output folder of the demo")
    path = out / "study.yaml"
    path.write_text(demo_study_text(out, args.quick))
    study = load_study(path)
    print(f"demo study: {path} (extends {_demo_file()})")
    print("generating the analytic-flow probe clouds and running the search with 2 workers")
    summary = run_study(study, workers=2, live=False if args.plain else None)
    for note in summary.notes:
        print(note)
    if summary.exit_code:
        print("stopped early; run the same command again to continue")
        return summary.exit_code
    tracking = summary.tracking if summary.tracking != "off" else None
    res = analyze(study, open_store(study), out / "analysis", mlflow_uri=tracking)
    print(res.get("summary") or res.get("message") or "analysis done")
    # Two finalists, the control and the tensor-basis network, 6 seeds of 10 epochs each:
    # the demo's time budget.
    make_dossier(study, quick=args.quick, finalists=None if args.quick else 2,
                 epochs=None if args.quick else 10, progress=print)
    reports = [f"analysis: {out / 'analysis'}", f"dossier:  {out / 'dossier'}"]
    for line in where_lines(summary) + reports:
        print(line)
    print(f"demo finished in {time.perf_counter() - t0:.0f} s")
    print("A learned closure found here must be validated against experiments or trusted "
          "simulations; local codes and licensed engineering practice prevail.")
    return 0


def register(sub) -> None:
    p = sub.add_parser("demo", help="run the whole job on the embedded demo",
                       description="Generate the demo flows, search, analyse and write the "
                                   "dossier.",
                       formatter_class=argparse.RawDescriptionHelpFormatter,
                       epilog="examples:\n"
                              "  searcher demo --quick          the same work, smaller (a few minutes)\n"
                              "  searcher demo --out /tmp/demo  the full demo into another folder")
    p.add_argument("--quick", action="store_true", help="a smaller demo (a few minutes)")
    p.add_argument("--out", default=None, metavar="DIR",
                   help="output folder (default runs/demo or runs/demo-quick)")
    p.add_argument("--plain", action="store_true", help="plain progress lines, no live panel")
    p.set_defaults(handler=_handle)
