"""Command-line entry point: ``searcher <command> ...``.

Each command lives in its own module ``searcher.cli._<name>`` exposing
``register(subparsers)``, which adds a parser and sets ``handler=fn(args) -> int``.
User errors (:class:`searcher.errors.UserError`) print located messages and exit 2.
"""
from __future__ import annotations

import argparse
import importlib
import sys

from searcher.errors import UserError
from searcher.options import kernel_choice

__all__ = ["main"]

# Order = order in ``searcher --help``.
COMMANDS = ("check", "schema", "data", "run", "status", "demo", "analyze", "compare", "dossier")

EPILOG = """examples:
  searcher demo --quick                 run the whole job on the embedded demo
  searcher check studies/demo.yaml      validate a study and show sample candidates
  searcher run studies/demo.yaml --workers 2
"""


def _version() -> str:
    """The installed package's version (pyproject.toml), or "unknown" for a bare checkout."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("searcher")
    except PackageNotFoundError:
        return "unknown (not installed)"


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="searcher",
        description="Search manager for E(3)-equivariant graph networks on physics fields.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"searcher {_version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        importlib.import_module(f"searcher.cli._{name}").register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help()
        return 2
    try:
        kernel_choice()  # a mistyped SEARCHER_KERNELS stops here, not as a fallback line
        return int(args.handler(args) or 0)
    except UserError as err:
        print(f"error: {err}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into `head` and friends: stop quietly
        sys.stderr.close()
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
