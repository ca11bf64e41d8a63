"""``searcher schema``: print the JSON Schema of the study language."""
from __future__ import annotations

import argparse
import json

from searcher.spec import json_schema

__all__ = ["register"]

EPILOG = """examples:
  searcher schema > study.schema.json     save it for an editor's YAML completion
"""


def _run(args) -> int:
    print(json.dumps(json_schema(), indent=2 if not args.compact else None))
    return 0


def register(sub) -> None:
    parser = sub.add_parser(
        "schema", help="print the JSON Schema (draft 2020-12) of study files",
        description="Print the JSON Schema (draft 2020-12) of study files and shared bases.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--compact", action="store_true", help="one line instead of indented")
    parser.set_defaults(handler=_run)
