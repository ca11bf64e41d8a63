"""``searcher demo``: the whole job on the embedded analytic-flow demo.

It writes a small study file into the output folder that extends ``studies/demo.yaml``
(``--quick`` shrinks the budget, data and epochs; ``--trials``/``--epochs`` shrink them
further), runs it with 2 workers and the demo's pruner, then the analysis and the dossier,
and prints where everything is.  An installed package carries the demo study and its base
config under ``searcher/examples/`` (copied there by the build, see ``setup.py``); a source
checkout reads them from ``studies/`` and ``configs/``.
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

    package = Path(searcher.__file__).resolve().parent
    places = (package / "examples" / "studies" / "demo.yaml",   # an installed package
              package.parent / "studies" / "demo.yaml")         # a source checkout
    for path in places:
        if path.exists():
            return path
    raise UserError.single("the demo study must ship with the package (searcher/examples/"
                           "studies/demo.yaml) or sit in the source tree (studies/demo.yaml), "
                           f"but neither exists under {package.parent}")


def _shorter(doc: dict, trials: int | None, epochs: int | None) -> None:
    """``--trials``/``--epochs``: override the budget and the epochs (the pruner's window
    shrinks with them, as the spec requires max_epochs <= training.epochs)."""
    if trials is not None:
        doc.setdefault("search", {}).setdefault("budget", {})["trials"] = trials
    if epochs is not None:
        doc.setdefault("training", {})["epochs"] = epochs
        pruner = doc.setdefault("search", {}).setdefault("pruner", {})
        pruner["max_epochs"] = epochs
        pruner["min_epochs"] = min(int(pruner.get("min_epochs", 2)), epochs - 1)


def demo_study_text(out: Path, quick: bool, trials: int | None = None,
                    epochs: int | None = None) -> str:
    """The study file the demo runs: ``studies/demo.yaml`` plus the output folder (and the
    ``--quick``, ``--trials`` and ``--epochs`` overrides)."""
    import copy

    doc = {"extends": str(_demo_file())}
    if quick:
        doc.update(copy.deepcopy(QUICK))
    _shorter(doc, trials, epochs)
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
    # the demo's pruner (outlook) needs a window of at least 2 epochs
    for key, least in (("trials", 1), ("epochs", 2)):
        value = getattr(args, key)
        if value is not None and value < least:
            raise UserError.single(f"must be at least {least}, but got {value}",
                                   path=f"--{key}")
    out = Path(args.out or ("runs/demo-quick" if args.quick else "runs/demo")).resolve()
    ensure_folder(out, "--out" if args.out else "output folder of the demo")
    path = out / "study.yaml"
    path.write_text(demo_study_text(out, args.quick, args.trials, args.epochs))
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
    epochs = args.epochs if args.epochs is not None else None if args.quick else 10
    make_dossier(study, quick=args.quick, finalists=None if args.quick else 2,
                 epochs=epochs, progress=print)
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
                              "  searcher demo --out /tmp/demo  the full demo into another folder\n"
                              "  searcher demo --quick --trials 4 --epochs 2\n"
                              "                                 a smoke test of an installation "
                              "(about a minute)\n\n"
                              "The demo writes into runs/ under the current folder; an "
                              "installed package\ncarries the demo study, so any folder will "
                              "do.")
    p.add_argument("--quick", action="store_true", help="a smaller demo (a few minutes)")
    p.add_argument("--out", default=None, metavar="DIR",
                   help="output folder (default runs/demo or runs/demo-quick)")
    p.add_argument("--trials", type=int, default=None, metavar="N",
                   help="search this many trials (overrides the demo's budget)")
    p.add_argument("--epochs", type=int, default=None, metavar="N",
                   help="train every trial (and every dossier re-run) for N epochs (N >= 2)")
    p.add_argument("--plain", action="store_true", help="plain progress lines, no live panel")
    p.set_defaults(handler=_handle)
