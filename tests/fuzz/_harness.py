"""Run ``searcher.cli.main`` in-process on hostile input: exit code, output, a hang guard."""
from __future__ import annotations

import contextlib
import io
import signal

__all__ = ["run_cli", "HANG_SECONDS"]

HANG_SECONDS = 20


class Hang(Exception):
    """The command did not return within HANG_SECONDS."""


def _alarm(signum, frame):
    raise Hang(f"no answer within {HANG_SECONDS} s")


def run_cli(argv: list[str]) -> tuple[int, str]:
    """``main(argv)`` with stdout/stderr captured; returns (code, text). Any exception other
    than SystemExit propagates: that is a crash the fuzz test reports."""
    from searcher.cli import main

    out, err = io.StringIO(), io.StringIO()
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(HANG_SECONDS)
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = main(argv)
            except SystemExit as stop:  # argparse
                code = stop.code if isinstance(stop.code, int) else 2
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
    return int(code or 0), out.getvalue() + err.getvalue()
