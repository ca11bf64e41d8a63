"""Mutation check: each promise of the main job, broken on purpose, must fail a test.

A mutant is one literal text replacement in one source file.  :func:`run_mutants` copies the
tracked (and untracked, not ignored) files of the working tree to a scratch folder, runs the
catching tests there once unmutated (they must pass, or "caught" would mean nothing), then
for each mutant applies its replacement, runs its tests with ``-x -q`` and restores the file.
A mutant survives when its tests still pass.  ``scripts/mutants`` is the command; it stays out
of ``scripts/test`` (it re-runs real sweeps, a few minutes in all).
"""
from __future__ import annotations

import dataclasses
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

__all__ = ["Mutant", "MUTANTS", "check_targets", "run_mutants", "format_table"]


@dataclasses.dataclass(frozen=True)
class Mutant:
    """One broken promise: replace ``original`` (present exactly once) in ``path``."""

    name: str
    promise: str
    path: str
    original: str
    replacement: str
    tests: tuple[str, ...]


MUTANTS: tuple[Mutant, ...] = (
    Mutant("gate-ignored", "the search rejects a candidate that fails the gate",
           "searcher/search/_trial.py",
           'reasons = ([] if gate.passed else [f"equivariance gate: {gate.reason}"]) + over',
           "reasons = [] + over",
           ("tests/search/test_sweeps.py::test_gate_failure_is_rejected_and_never_trained",)),
    Mutant("gate-lets-through", "the gate fails a non-equivariant block",
           "searcher/models/_gate.py",
           "if math.isnan(worst) or worst > tol:",
           "if math.isnan(worst):",
           ("tests/models/test_gate.py::test_broken_block_is_caught",
            "tests/models/test_gate.py::test_coordinate_dependent_bias_fails_the_gate")),
    Mutant("closure-signs", "the SZL closure's coefficients have their published signs",
           "searcher/data/_closure.py",
           "SZL_COEFFICIENTS = (3.0, -15.0, -19.0)",
           "SZL_COEFFICIENTS = (-3.0, 15.0, 19.0)",
           ("tests/data/test_closure.py::test_szl_simple_shear_hand_worked",)),
    Mutant("pruning-off", "the pruner is asked after every epoch but the last",
           "searcher/search/_trial.py",
           "if epoch < last and trial.should_prune():",
           "if False and trial.should_prune():",
           ("tests/search/test_sweeps.py::test_median_pruner_cuts_a_slow_learner",)),
    Mutant("u-v-swapped", "expected best: V-statistic by default, U when unbiased",
           "searcher/analysis/_expected.py",
           "    if not unbiased:\n",
           "    if unbiased:\n",
           ("tests/analysis/test_expected.py::test_check_values_mirrored_for_losses",)),
    Mutant("traits-u-swapped", "numeric trait effect is U(inside) / (n m)",
           "searcher/analysis/_traits.py",
           '"effect": float(res.statistic) / (inside.size * outside.size)',
           '"effect": 1 - float(res.statistic) / (inside.size * outside.size)',
           ("tests/analysis/test_traits.py::test_numeric_effect_size_is_u_over_nm",)),
    Mutant("wilson-z", "the Wilson interval uses the two-sided z",
           "searcher/analysis/_expected.py",
           "z = float(norm.ppf(0.5 + level / 2))",
           "z = float(norm.ppf(level))",
           ("tests/analysis/test_expected.py::test_wilson_textbook_value",)),
    Mutant("password-shown", "passwords in storage URLs are masked",
           "searcher/search/_urls.py",
           "lambda m: f\"{m['scheme']}{m['user']}:***@\"",
           "lambda m: m.group(0)",
           ("tests/search/test_urls.py",)),
    Mutant("stale-not-retried", "a lost trial is queued again once",
           "searcher/search/_recover.py",
           "and t.number not in retried and t.params:",
           "and t.number in retried and t.params:",
           ("tests/search/test_recover.py",)),
    Mutant("verdict-without-interval", "a dossier win needs the interval's lower bound > 0.5",
           "searcher/report/_stats.py",
           "elif low > 0.5 and p > MEANINGFUL_P:",
           "elif p > MEANINGFUL_P:",
           ("tests/report/test_stats.py::test_p_outperform_rule_of_bouthillier",)),
)


def check_targets(root: Path, mutants=MUTANTS) -> list[str]:
    """One problem line per mutant whose original text is not in its file exactly once."""
    problems = []
    for m in mutants:
        file = Path(root) / m.path
        if not file.is_file():
            problems.append(f"{m.name}: {m.path} does not exist")
            continue
        count = file.read_text(encoding="utf-8").count(m.original)
        if count != 1:
            problems.append(f"{m.name}: {m.path} holds the original text {count} times "
                            f"(must be exactly once): {m.original!r}")
    return problems


def _copy_tree(root: Path, dest: Path) -> None:
    listed = subprocess.run(["git", "ls-files", "-z", "--cached", "--others", "--exclude-standard"],
                            cwd=root, check=True, capture_output=True).stdout.split(b"\0")
    for rel in (p.decode() for p in listed if p):
        src = root / rel
        if src.is_file():
            (dest / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(src, dest / rel)


def _pytest(tree: Path, tests) -> tuple[int, str]:
    env = {**os.environ, "PYTHONPATH": str(tree), "OMP_NUM_THREADS": "1",
           "MKL_NUM_THREADS": "1", "PYTHONDONTWRITEBYTECODE": "1"}
    proc = subprocess.run([sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider",
                           *tests], cwd=tree, env=env, capture_output=True, text=True)
    lines = (proc.stdout + proc.stderr).strip().splitlines()
    return proc.returncode, (lines[-1] if lines else "")


# pytest exit codes: 0 all passed (the mutant survived), 1 a test failed (caught); anything
# else (collection error, usage error, no test ran) is an "error": the tests never judged it.
_RESULTS = {0: "survived", 1: "caught"}


def run_mutants(root: Path, mutants=MUTANTS, echo=print) -> tuple[int, list[dict]]:
    """Apply each mutant to a scratch copy of ``root`` and run its tests.

    Returns:
        ``(exit_code, rows)``: 0 when every mutant was caught; 1 when one survived (or its
        tests could not run) or the unmutated tests fail; 2 when a mutant's original text
        is not found exactly once.
    """
    root = Path(root).resolve()
    problems = check_targets(root, mutants)
    if problems:
        for line in problems:
            echo(f"mutants: {line}")
        return 2, []
    rows = []
    with tempfile.TemporaryDirectory(prefix="searcher-mutants-") as tmp:
        tree = Path(tmp)
        _copy_tree(root, tree)
        every = sorted({t for m in mutants for t in m.tests})
        start = time.monotonic()
        code, last = _pytest(tree, every)
        echo(f"unmutated: {len(every)} test selections {'pass' if code == 0 else 'FAIL'} "
             f"({time.monotonic() - start:.0f} s) {last}")
        if code != 0:
            return 1, []
        for m in mutants:
            file = tree / m.path
            text = file.read_text(encoding="utf-8")
            file.write_text(text.replace(m.original, m.replacement), encoding="utf-8")
            start = time.monotonic()
            try:
                code, last = _pytest(tree, m.tests)
            finally:
                file.write_text(text, encoding="utf-8")
            row = {"mutant": m.name, "promise": m.promise, "file": m.path,
                   "tests": list(m.tests), "result": _RESULTS.get(code, "error"),
                   "seconds": round(time.monotonic() - start, 1), "last_line": last}
            rows.append(row)
            echo(f"{m.name}: {row['result']} ({row['seconds']:.0f} s) {last}")
    return (1 if any(r["result"] != "caught" for r in rows) else 0), rows


def format_table(rows: list[dict]) -> str:
    """A Markdown table: mutant, file, tests run, result."""
    lines = ["| mutant | promise broken | file | tests run | result | s |",
             "|---|---|---|---|---|---|"]
    for r in rows:
        tests = "<br>".join(f"`{t}`" for t in r["tests"])
        lines.append(f"| {r['mutant']} | {r['promise']} | `{r['file']}` | {tests} | "
                     f"{r['result']} | {r['seconds']:.0f} |")
    return "\n".join(lines)


def main(argv=None) -> int:
    import argparse

    parser = argparse.ArgumentParser(prog="scripts/mutants",
                                     description="Break each promise once; a test must fail.")
    parser.add_argument("--only", nargs="*", default=None, help="mutant names to run")
    args = parser.parse_args(argv)
    chosen = MUTANTS
    if args.only:
        unknown = sorted(set(args.only) - {m.name for m in MUTANTS})
        if unknown:
            print(f"mutants: unknown mutant(s) {', '.join(unknown)}; must be one of "
                  f"{', '.join(m.name for m in MUTANTS)}", file=sys.stderr)
            return 2
        chosen = tuple(m for m in MUTANTS if m.name in args.only)
    root = Path(__file__).resolve().parents[2]
    code, rows = run_mutants(root, chosen)
    if rows:
        print()
        print(format_table(rows))
    survivors = [f"{r['mutant']} ({r['result']})" for r in rows if r["result"] != "caught"]
    if survivors:
        print(f"\nmutants: {len(survivors)} not caught: {', '.join(survivors)}", file=sys.stderr)
    return code


if __name__ == "__main__":
    sys.exit(main())
