"""``searcher analyze``: curve groups, the good group's traits and importance for a study."""
from __future__ import annotations

import argparse
from pathlib import Path

import optuna

__all__ = ["register", "load_store"]

EPILOG = """examples:
  searcher analyze studies/demo.yaml                 summary here, charts in runs/demo/analysis
  searcher analyze studies/demo.yaml --json          the whole result as one JSON object
  searcher analyze studies/demo.yaml --audit 6       also re-run 6 pruned trials to the full budget
"""


def load_store(study, storage: str | None = None) -> optuna.Study:
    """Open an existing study store read-only (nothing is created when it is missing).

    Args:
        study: a loaded :class:`searcher.spec.Study`.
        storage: URL overriding ``search.storage`` (``--storage``).

    Raises:
        UserError: no journal file yet, the storage cannot be opened, or it holds no study
            of that name.
    """
    from searcher.search import read_store

    return read_store(study, storage)


def _tracking(study) -> str | None:
    uri = study.fixed()["tracking"]["uri"]
    if uri:
        return uri
    db = Path(study.output_dir) / "mlflow.db"
    return f"sqlite:///{db.resolve()}" if db.exists() else None


def _run(args) -> int:
    from searcher.analysis import analyze, dumps, prune_audit
    from searcher.spec import load_study

    study = load_study(args.study)
    store = load_store(study, args.storage)
    out = Path(args.out) if args.out else Path(study.output_dir) / "analysis"
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
