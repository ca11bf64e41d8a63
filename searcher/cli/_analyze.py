"""``searcher analyze``: curve groups, the good group's traits and importance for a study."""
from __future__ import annotations

import argparse
from pathlib import Path

__all__ = ["register", "output_folder"]

EPILOG = """examples:
  searcher analyze studies/demo.yaml                 summary here, charts in runs/demo/analysis
  searcher analyze studies/demo.yaml --json          the whole result as one JSON object
  searcher analyze studies/demo.yaml --audit 6       also re-run 6 pruned trials to the full budget
"""


def output_folder(out: str | None, study, *default: str) -> Path:
    """The folder a reading command writes to, created and checked before any work.

    Args:
        out: ``--out`` when given.
        study: the study whose output folder holds the default.
        default: the default's parts below ``<output>`` (``"analysis"``, ...).

    Raises:
        UserError: the folder cannot be made or written; it names ``--out`` or, for the
            default, the study file's ``output.folder``.
    """
    from searcher.errors import ensure_folder

    if out:
        return ensure_folder(out, "--out")
    return ensure_folder(Path(study.output_dir).joinpath(*default), "output.folder",
                         file=str(study.path))


def _tracking(study) -> str | None:
    from searcher.search import tracking_uri

    uri = tracking_uri(study.fixed()["tracking"]["uri"], study.output_dir)
    # A sqlite file exists once a run has tracked to it; reading must not create an empty
    # tracking store (nor look for the study's run in one).
    if uri.startswith("sqlite:///") and not Path(uri[len("sqlite:///"):]).exists():
        return None
    return uri


def _run(args) -> int:
    from searcher.analysis import analyze, dumps, prune_audit
    from searcher.errors import UserError
    from searcher.search import read_store
    from searcher.spec import load_study

    if args.audit < 0:
        raise UserError.single(f"must be at least 0, but got {args.audit}", path="--audit")
    study = load_study(args.study)
    store = read_store(study, args.storage)
    out = output_folder(args.out, study, "analysis")
    res = analyze(study, store, out, mlflow_uri=_tracking(study))
    if args.audit:
        res["audit"] = prune_audit(study, store, res, args.audit)
    if args.json:
        res.pop("summary")
        print(dumps(res))
    else:
        print(res["summary"])
        if args.audit:
            print(f"Prune audit: {res['audit']['message']}")
    return 0


def register(sub) -> None:
    parser = sub.add_parser(
        "analyze", help="group a study's curves and explain its good configurations",
        description="Group validation curves into behaviours, name the good group (if one is "
                    "distinct), list its traits and rules, rank parameter importance, and "
                    "write charts and JSON under <output>/analysis.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("study", help="the study YAML file")
    parser.add_argument("--json", action="store_true", help="one JSON object on stdout")
    parser.add_argument("--audit", type=int, default=0, metavar="N",
                        help="re-run N pruned trials (stratified by pruning epoch) to the full "
                             "budget and count how many reach the good group")
    parser.add_argument("--storage", default=None, metavar="URL",
                        help="storage URL (default: the study's search.storage or its journal)")
    parser.add_argument("--out", default=None, metavar="DIR",
                        help="output folder (default <output>/analysis)")
    parser.set_defaults(handler=_run)
