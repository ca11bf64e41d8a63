"""What changed between two search spaces (after ``extends``), and may they be compared?"""
from __future__ import annotations

import json

from searcher.errors import Problem, UserError
from searcher.spec import flatten

__all__ = ["space_diff", "comparability_problems", "check_comparable"]

_TASK_KEYS = ("source", "fields", "split")


def _space(study) -> dict:
    """dotted name -> ("dim", spec) for dimensions, ("fixed", value) for model/training keys."""
    dims = {d.name: ("dim", d.spec()) for d in study.dimensions}
    fixed = study.fixed()
    for section in ("model", "training"):
        for name, value in flatten(fixed[section], section).items():
            dims.setdefault(name, ("fixed", value))
    return dims


def _relation(a: dict, b: dict) -> str | None:
    """"narrowed"/"widened"/"changed" from a to b, None when the same."""
    if a == b:
        return None
    if a["kind"] != b["kind"] or a.get("only_if") != b.get("only_if"):
        return "changed"
    if a["kind"] == "choice":
        sa, sb = ({json.dumps(o, sort_keys=True) for o in d["options"]} for d in (a, b))
        return "narrowed" if sb < sa else "widened" if sb > sa else "changed"
    if a["kind"] in ("int", "float") and a["step"] == b["step"] and a["log"] == b["log"]:
        if a["lo"] <= b["lo"] and b["hi"] <= a["hi"]:
            return "narrowed"
        if b["lo"] <= a["lo"] and a["hi"] <= b["hi"]:
            return "widened"
    return "changed"


def space_diff(study_a, study_b) -> dict:
    """Dimensions added, removed, narrowed, widened or changed going from A to B.

    Returns ``{"added": [...], "removed": [...], "narrowed": [...], "widened": [...],
    "changed": [...]}``, each entry ``{"name", "a", "b"}`` (a dimension's canonical spec or
    a fixed value).  A key fixed in both but to different values counts as changed.
    """
    sa, sb = _space(study_a), _space(study_b)
    out = {k: [] for k in ("added", "removed", "narrowed", "widened", "changed")}
    for name in sorted(set(sa) | set(sb)):
        (ka, va), (kb, vb) = sa.get(name, ("fixed", None)), sb.get(name, ("fixed", None))
        if ka == kb == "fixed":
            kind = "changed" if va != vb else None
        elif ka == "fixed":
            kind = "added"
        elif kb == "fixed":
            kind = "removed"
        else:
            kind = _relation(va, vb)
        if kind:
            out[kind].append({"name": name, "a": va, "b": vb})
    return out


def comparability_problems(study_a, study_b, hashes_a: set, hashes_b: set) -> list[Problem]:
    """Reasons why two studies' losses are not on the same footing (empty: comparable)."""
    problems = []
    ta, tb = (flatten({k: s.fixed()["task"].get(k) for k in _TASK_KEYS}, "task")
              for s in (study_a, study_b))
    for key in sorted(set(ta) | set(tb)):
        if ta.get(key) != tb.get(key):
            problems.append(Problem(
                f"studies must share {key} to be compared, but {study_a.name} has "
                f"{ta.get(key)!r} and {study_b.name} has {tb.get(key)!r}",
                file=str(study_b.path), path=key))
    if hashes_a and hashes_b and hashes_a != hashes_b:
        problems.append(Problem(
            f"studies must have trained on the same data (trial data_hash), but "
            f"{study_a.name} has {sorted(h[:12] for h in hashes_a)} and {study_b.name} has "
            f"{sorted(h[:12] for h in hashes_b)}", file=str(study_b.path), path="task"))
    return problems


def check_comparable(studies, hashes, force: bool) -> list[str]:
    """Raise :class:`UserError` for incomparable studies unless ``force``; then warnings."""
    problems = [p for s, h in zip(studies[1:], hashes[1:])
                for p in comparability_problems(studies[0], s, hashes[0], h)]
    if problems and not force:
        problems.append(Problem("pass --force to compare anyway (results will carry a "
                                "warning)"))
        raise UserError(problems)
    return [f"warning: {p.render()}" for p in problems]
