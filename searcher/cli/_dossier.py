"""``searcher dossier STUDY.yaml``: re-train the finalists over seeds and write the dossier."""
from __future__ import annotations

import argparse
import sys

__all__ = ["register"]


def register(sub) -> None:
    p = sub.add_parser(
        "dossier", help="re-train the finalists over seeds and write the evidence dossier",
        description="Re-train the study's finalists and a non-equivariant control over several "
                    "seeds at full fidelity, weigh the evidence and write HTML, Markdown and "
                    "JSON plus the chosen model (choice.yaml + choice.pt).",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog="example:\n  searcher dossier studies/demo.yaml --quick")
    p.add_argument("study", help="the study file (YAML)")
    p.add_argument("--finalists", type=int, metavar="K", help="finalists to re-train (default 3)")
    p.add_argument("--seeds", type=int, metavar="S", help="seeds per finalist (default 6)")
    p.add_argument("--epochs", type=int, metavar="E",
                   help="epochs per re-run (default twice the study's)")
    p.add_argument("--out", metavar="DIR", help="dossier folder (default <output>/dossier)")
    p.add_argument("--storage", metavar="URL", help="Optuna storage overriding the study's")
    p.add_argument("--quick", action="store_true",
                   help="2 finalists, the control and the references, 2 seeds, the study's epochs")
    p.add_argument("--json", action="store_true", help="print the dossier content as JSON")
    p.set_defaults(handler=run)


def run(args) -> int:
    from searcher.report import json_text, make_dossier
    from searcher.spec import load_study

    study = load_study(args.study)
    say = None if args.json else (lambda line: print(line, file=sys.stderr))
    content = make_dossier(study, finalists=args.finalists, seeds=args.seeds,
                           epochs=args.epochs, out=args.out, quick=args.quick,
                           storage=args.storage, progress=say)
    if args.json:
        print(json_text(content))
        return 0
    pick = content["pick"]
    print(pick["decision"])
    for reason in pick["reasons"]:
        print(f"  - {reason}")
    print(f"dossier: {content['folder']}/{content['files']['html']}")
    print("caution: " + content["cautions"][0])
    return 0
