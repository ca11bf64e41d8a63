"""``searcher run``: run or continue a study's search."""
from __future__ import annotations

import argparse

from searcher.spec import load_study

__all__ = ["register", "where_lines"]

EPILOG = """examples:
  searcher run studies/demo.yaml --workers 2            run (or continue) the study
  searcher run studies/demo.yaml --trials 40 --until 18:30
  searcher run studies/demo.yaml --storage postgresql://me@db.lab/searches

Ctrl-C (or SIGTERM) lets every worker finish its current epoch; those trials are recorded
as interrupted and re-queued when the same command runs again. A store made from another
search space (the file changed, or two files share a study name) is refused unless
--new-space is given. Exit code 130 after SIGINT,
143 after SIGTERM, 0 when the budget or the deadline was reached.
"""


def where_lines(summary) -> list[str]:
    """Lines saying where the study's results are and how to browse them."""
    lines = [f"trials:   {summary.storage}"]
    if summary.tracking != "off":
        lines.append(f"tracking: {summary.tracking}")
        if summary.tracking.startswith("sqlite:"):
            lines.append(f"browse:   mlflow ui --backend-store-uri {summary.tracking}")
    return lines


def _handle(args: argparse.Namespace) -> int:
    from searcher.search import run_study

    study = load_study(args.study)
    summary = run_study(study, workers=args.workers, trials=args.trials, hours=args.hours,
                        until=args.until, storage=args.storage, out=args.out,
                        live=False if args.plain else None, new_space=args.new_space)
    for note in summary.notes:
        print(note)
    for line in where_lines(summary):
        print(line)
    if summary.exit_code:
        print("stopped early; run the same command again to continue")
    return summary.exit_code


def register(sub) -> None:
    p = sub.add_parser("run", help="run or continue a study's search",
                       description="Run (or continue) the search of a study file.",
                       epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("study", help="study YAML file")
    p.add_argument("--workers", type=int, default=None, help="worker processes "
                   "(default: search.workers)")
    p.add_argument("--trials", type=int, default=None, help="total trials to reach in the "
                   "store (default: search.budget.trials; 0 = no limit)")
    p.add_argument("--hours", type=float, default=None, help="stop after this many hours")
    p.add_argument("--until", default=None, metavar="HH:MM", help="stop at this local time")
    p.add_argument("--storage", default=None, metavar="URL",
                   help="Optuna storage URL (default: journal file in the output folder)")
    p.add_argument("--out", default=None, metavar="DIR", help="output folder")
    p.add_argument("--plain", action="store_true", help="plain progress lines, no live panel")
    p.add_argument("--new-space", action="store_true",
                   help="the study file's search space changed since the store was made: add "
                        "trials from the new space beside the old ones (without it, run "
                        "refuses with exit 2)")
    p.set_defaults(handler=_handle)
