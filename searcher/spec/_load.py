"""``extends:`` chains: reading base files and merging them key by key, with positions.

Mappings merge recursively; everything else (lists, values, whole dimensions) replaces what
a base said.  Positions follow the file that wrote each value, so a problem found after
merging still points into the right file.
"""
from __future__ import annotations

from pathlib import Path

from searcher.errors import Problem, UserError
from searcher.spec._dims import is_dimension
from searcher.spec._yaml import Located, read_yaml

__all__ = ["load_merged"]


def _merge(base, over, path: tuple, replaced: list):
    if isinstance(base, dict) and isinstance(over, dict) and not is_dimension(base) \
            and not is_dimension(over):
        out = dict(base)
        for key, value in over.items():
            out[key] = _merge(base[key], value, path + (key,), replaced) if key in base else value
        return out
    replaced.append(path)
    return over


def merge_located(base: Located, over: Located) -> Located:
    """``over`` on top of ``base``; positions of replaced values are dropped with them."""
    replaced: list = []
    data = _merge(base.data, over.data, (), replaced)

    def kept(table):
        return {p: pos for p, pos in table.items()
                if not any(len(p) > len(r) and p[:len(r)] == r for r in replaced)}
    return Located(data, {**kept(base.values), **over.values}, {**kept(base.keys), **over.keys})


def _bases(doc: Located, file: str, problems: list) -> list[tuple[str, tuple]]:
    ext = doc.data.pop("extends", None)
    if ext is None:
        return []
    items = [ext] if isinstance(ext, str) else ext
    if not isinstance(items, list) or not all(isinstance(i, str) and i for i in items):
        pos = doc.values.get(("extends",))
        problems.append(Problem(f"extends takes a file path or a list of them, got {ext!r}",
                                file=file, line=pos.line if pos else 0,
                                column=pos.column if pos else 0, path="extends"))
        return []
    at = [("extends",)] if isinstance(ext, str) else [("extends", i) for i in range(len(items))]
    return list(zip(items, at))


def _without_name(doc: Located) -> Located:
    """A base file's content without ``study.name``: a study is named by its own file."""
    study = doc.data.get("study") if isinstance(doc.data, dict) else None
    if isinstance(study, dict) and "name" in study:
        doc.data["study"] = {k: v for k, v in study.items() if k != "name"}
        doc.values.pop(("study", "name"), None)
        doc.keys.pop(("study", "name"), None)
    return doc


def _load(path: Path, stack: list[Path], problems: list) -> Located:
    try:
        doc = read_yaml(path)
    except UserError as err:
        problems.extend(err.problems)
        return Located({})
    merged = Located({})
    for text, at in _bases(doc, str(path), problems):
        base = (path.parent / text).resolve()
        pos = doc.values[at]
        where = dict(file=str(path), line=pos.line, column=pos.column, path="extends")
        if base in stack:
            chain = " -> ".join(p.name for p in stack + [base])
            problems.append(Problem(f"extends cycle: {chain}", **where))
        elif not base.is_file():
            problems.append(Problem(f"base file {text!r} not found (looked for {base})", **where))
        else:
            merged = merge_located(merged, _without_name(_load(base, stack + [base], problems)))
    return merge_located(merged, doc)


def load_merged(path: Path | str) -> tuple[Located, list[Problem]]:
    """Read a study and its bases.

    Args:
        path: the study file.

    Returns:
        The merged data with positions, and the problems met on the way (the caller reports
        them together with validation problems).
    """
    path = Path(path)
    problems: list[Problem] = []
    located = _load(path, [path.resolve()], problems)
    return located, problems
