"""Run ``searcher.cli.main`` in-process on hostile input: exit code and output.

No clock guards the run: the work is bounded by counts instead (hypothesis ``max_examples``
and the size of each generated file), so a hang shows as a test that does not finish.
"""
from __future__ import annotations

import contextlib
import io
import tempfile
from pathlib import Path
from typing import Callable

__all__ = ["run_cli", "assert_read_or_located"]


def run_cli(argv: list[str]) -> tuple[int, str]:
    """``main(argv)`` with stdout/stderr captured; returns (code, text). Any exception other
    than SystemExit propagates: that is a crash the fuzz test reports."""
    from searcher.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as stop:  # argparse
            code = stop.code if isinstance(stop.code, int) else 2
    return int(code or 0), out.getvalue() + err.getvalue()


def assert_read_or_located(name: str, write: Callable[[Path], None], argv: list[str]) -> None:
    """Write a fuzzed file ``name`` with ``write(path)`` in a fresh folder, run
    ``searcher <argv> <path> ...`` (the path replaces ``"{path}"`` in ``argv``) and assert
    the answer is a success or a located error: exit 0 or 2, no traceback, and on 2 an
    ``error:`` line naming the file."""
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / name
        write(path)
        code, out = run_cli([str(path) if a == "{path}" else a for a in argv])
    assert "Traceback" not in out
    assert code in (0, 2), out
    if code == 2:
        assert "error:" in out and name in out, out
