"""``searcher status``: where a study stands (read from its store)."""
from __future__ import annotations

import argparse
import json
import sys

from searcher.spec import load_study

__all__ = ["register"]

EPILOG = """examples:
  searcher status studies/demo.yaml
  searcher status studies/demo.yaml --json

Exit code 1 when the study has never run (nothing stored yet).
"""


def _human(status: dict) -> None:
    print(f"study {status['study']}  ({status['n_trials']} trials)")
    print(f"trials kept in {status['storage']}")
    counts = "  ".join(f"{k} {v}" for k, v in status["counts"].items() if v)
    print(f"outcomes: {counts or 'none yet'}")
    print(f"cpu time: {status['cpu_seconds'] / 3600:.2f} h")
    best = status["best"]
    if best:
        from searcher.search import config_line

        print(f"best:     {best['value']:.5g} (trial {best['number']})  "
              f"{config_line(best['config'])}")
    else:
        print("best:     none yet")


def _handle(args: argparse.Namespace) -> int:
    from searcher.search import study_status

    status = study_status(load_study(args.study), args.storage, out=args.out)
    if not status["stored"]:
        # a store path that does not exist would read as if the study lived there
        if args.json:
            print(json.dumps(status, indent=2, default=str))
        print(f"study {status['study']} has never run: no trials are stored (expected at "
              f"{status['storage']}); start it with `searcher run {args.study}`",
              file=sys.stderr)
        return 1
    if args.json:
        print(json.dumps(status, indent=2, default=str))
    else:
        _human(status)
    return 0


def register(sub) -> None:
    p = sub.add_parser("status", help="show where a study stands",
                       description="Counts by outcome, the best trial and CPU time used.",
                       epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("study", help="study YAML file")
    p.add_argument("--json", action="store_true", help="machine-readable output")
    p.add_argument("--storage", default=None, metavar="URL", help="Optuna storage URL")
    p.add_argument("--out", default=None, metavar="DIR", help="output folder")
    p.set_defaults(handler=_handle)
