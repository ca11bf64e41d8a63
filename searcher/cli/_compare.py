"""``searcher compare``: expected best loss against trials and compute for several studies."""
from __future__ import annotations

import argparse
import math

from searcher.cli._analyze import output_folder

__all__ = ["register"]

EPILOG = """examples:
  searcher compare studies/demo.yaml studies/demo-narrow.yaml
  searcher compare A.yaml B.yaml C.yaml --target 0.02 --json
  searcher compare A.yaml B.yaml --force          compare although tasks or data differ
"""


def _run(args) -> int:
    from searcher.analysis import compare, dumps
    from searcher.errors import UserError
    from searcher.search import read_store
    from searcher.spec import load_study

    if args.target is not None and not (math.isfinite(args.target) and args.target > 0):
        # losses are positive: a NaN, infinite or non-positive target makes every hit moot
        raise UserError.single(f"must be a finite positive loss, but got {args.target}",
                               path="--target")
    if len(args.studies) < 2:   # said before any store is opened
        raise UserError.single(f"compare needs two or more study files, but got "
                               f"{len(args.studies)}", path="STUDY")
    studies = [load_study(path) for path in args.studies]
    pairs = [(s, read_store(s)) for s in studies]
    out = output_folder(args.out, studies[0], "analysis", "compare")
    res = compare(pairs, target=args.target, force=args.force, out_dir=out)
    if args.json:
        print(dumps(res))
    else:
        print(res["markdown"], end="")
        print("Files: " + ", ".join(res["files"]))
    return 0


def register(sub) -> None:
    parser = sub.add_parser(
        "compare", help="compare search spaces by expected best loss vs trials and compute",
        description="Expected best loss of n trials (V- and U-statistics) against trials and "
                    "compute, hit rates at a target with Wilson intervals, shares of "
                    "rejected/diverged/pruned trials, what changed between the spaces, and a "
                    "verdict with its uncertainty.  The first study is the baseline.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("studies", nargs="+", metavar="STUDY", help="two or more study files")
    parser.add_argument("--target", type=float, default=None, metavar="LOSS",
                        help="loss counted as a hit (default: best of all studies × 10)")
    parser.add_argument("--json", action="store_true", help="one JSON object on stdout")
    parser.add_argument("--out", default=None, metavar="DIR",
                        help="output folder (default <first study's output>/analysis/compare)")
    parser.add_argument("--force", action="store_true",
                        help="compare even when tasks or data differ (adds a warning)")
    parser.set_defaults(handler=_run)
