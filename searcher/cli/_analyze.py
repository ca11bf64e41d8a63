"""``searcher analyze``: curve groups, the good group's traits and importance for a study."""
from __future__ import annotations

import argparse
from pathlib import Path
from urllib.parse import urlsplit

import optuna

from searcher.errors import UserError

__all__ = ["register", "load_store"]

EPILOG = """examples:
  searcher analyze studies/demo.yaml                 summary here, charts in runs/demo/analysis
  searcher analyze studies/demo.yaml --json          the whole result as one JSON object
  searcher analyze studies/demo.yaml --audit 6       also re-run 6 pruned trials to the full budget
"""


def _masked(url: str) -> str:
    parts = urlsplit(url)
    return url.replace(f":{parts.password}@", ":***@") if parts.password else url


def load_store(study, storage: str | None = None) -> optuna.Study:
    """Open an existing study store read-only (nothing is created when it is missing).

    Args:
        study: a loaded :class:`searcher.spec.Study`.
        storage: URL overriding ``search.storage`` (``--storage``).

    Raises:
        UserError: no journal file yet, the storage cannot be opened, or it holds no study
            of that name.
    """
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    url = storage or study.fixed()["search"]["storage"]
    where = {"path": "--storage"} if storage else {"file": str(study.path),
                                                    "path": "search.storage"}
    if not url:
        path = Path(study.output_dir) / "study.journal"
        if not path.exists():
            raise UserError.single(f"the study's journal must exist to be read, but {path} "
                                   f"does not (run the study first)", **where)
        store = optuna.storages.JournalStorage(
            optuna.storages.journal.JournalFileBackend(str(path)))
    else:
        try:
            store = optuna.storages.RDBStorage(url)
        except Exception as err:  # any driver or connection failure is a user-side problem
            raise UserError.single(f"cannot open the storage {_masked(url)}: "
                                   f"{type(err).__name__}", **where) from None
    names = optuna.get_all_study_names(store)
    if study.name not in names:
        raise UserError.single(f"the storage must hold a study named {study.name!r}, but it "
                               f"holds {names or 'none'}", **where)
    return optuna.load_study(study_name=study.name, storage=store)


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
