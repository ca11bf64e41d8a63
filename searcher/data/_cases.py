"""Cases: the family of a file sample, and splits that keep each case in one part.

A folder source holds cases: a data file directly in the folder is a case of its own (named
by its stem); a sub-folder is one case (named by the folder) holding every data file in it.
Every patch of a file belongs to the file's case.  Samples of one case are strongly
correlated (pieces of one flow), so with ``task.split.by: case`` whole cases go to train,
val or test, never a case to two parts (spatial cross-validation practice, Roberts et al.
2017, Ecography 40).
"""
from __future__ import annotations

from pathlib import Path

from searcher.data._splits import split_samples
from searcher.errors import UserError

__all__ = ["MIN_CASES", "case_files", "check_hold_out", "split_by_case"]

MIN_CASES = 3   # one case each for train, val and test


def case_files(folder: Path, suffixes: tuple[str, ...]) -> list[tuple[Path, str]]:
    """``(file, case)`` of a folder source, files directly in it first, then sub-folders,
    each in name order."""
    top = sorted(p for p in folder.iterdir() if p.is_file() and p.suffix.lower() in suffixes)
    out = [(p, p.stem) for p in top]
    for sub in sorted(p for p in folder.iterdir() if p.is_dir()):
        out += [(p, sub.name) for p in sorted(sub.iterdir())
                if p.is_file() and p.suffix.lower() in suffixes]
    names = [c for _, c in out]
    clash = sorted({c for c in names if names.count(c) > 1 and
                    sum(1 for p, n in out if n == c and p.parent == folder) > 0})
    if clash:
        raise UserError.single(f"case name {clash[0]!r} is both a file stem and a sub-folder "
                               "(rule: case names are unique)", file=str(folder),
                               path="task.source")
    return out


def split_by_case(cases: list[str], split_cfg: dict, source: str) -> tuple[dict, str]:
    """Train/val/test indices into ``cases`` (one entry per sample) and the rule used.

    ``by: case`` with at least :data:`MIN_CASES` distinct cases splits the cases (seeded, by
    ``fractions``) and gives every sample its case's part; otherwise samples are split one
    by one and the rule says ``sample``.
    """
    names = sorted(set(cases))
    if split_cfg.get("by", "case") != "case" or source == "demo" or len(names) < MIN_CASES:
        return split_samples(list(range(len(cases))), split_cfg["fractions"],
                             split_cfg["seed"]), "sample"
    parts = split_samples(list(range(len(names))), split_cfg["fractions"], split_cfg["seed"])
    where = {names[i]: part for part, idx in parts.items() for i in idx}
    return {part: [i for i, c in enumerate(cases) if where[c] == part]
            for part in ("train", "val", "test")}, "case"


def check_hold_out(hold: set, cases: set, source: str) -> None:
    """``hold_out`` must name cases of the source (file data; the demo names families)."""
    unknown = sorted(hold - cases)
    if unknown:
        raise UserError.single(f"hold_out names {unknown[0]!r}, which is not a case of the "
                               f"source; cases: {', '.join(sorted(cases))}", file=str(source),
                               path="task.split.hold_out")
