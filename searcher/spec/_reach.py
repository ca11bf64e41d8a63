"""Whole-space checks at compile time: derived values and reachability of the target.

Impossible targets must be found when the space is compiled, not after a day of training,
so every point of the discrete part that matters is tried (all of them up to
``MAX_POINTS``, else the extreme corners) and each distinct failure is reported once.
"""
from __future__ import annotations

import itertools
import math

from searcher.errors import UserError
from searcher.spec._dims import Sink
from searcher.spec._irreps import (EQUIVARIANT_FAMILIES, hidden_irreps, parse_irreps,
                                   reachable_irreps, task_fields)

__all__ = ["check_points", "MAX_POINTS"]

MAX_POINTS = 5000
_SHAPING = ("model.family", "model.hidden.irreps", "model.hidden.lmax",
            "model.hidden.multiplicity", "model.hidden.taper", "model.hidden.parity",
            "model.edge_attrs.lmax", "model.width")


def _relevant(study) -> list:
    """Searched dimensions that shape reachability or feed a derived value, with the
    dimensions their conditions and expressions name."""
    dims = {d.name: d for d in study.dimensions}
    wanted = {n for n in _SHAPING if n in dims} | {d.name for d in study.dimensions
                                                   if d.kind == "derived"}
    grew = True
    while grew:
        more = {k for n in wanted for k in list(dims[n].only_if) +
                (dims[n].expr.names if dims[n].expr else []) if k in dims}
        grew = not more <= wanted
        wanted |= more
    return [d for d in study.dimensions if d.name in wanted and d.kind != "derived"]


def _points(dims: list):
    full = math.prod(d.size() or 2 for d in dims)
    axes = [d.values() if full <= MAX_POINTS and d.kind != "float" else d.extremes() for d in dims]
    return itertools.islice(itertools.product(*axes), MAX_POINTS)


def _advice(missing: list, cfg: dict, hidden: str) -> tuple[str, str]:
    model = cfg["model"]
    top = max(l for _, l, _ in parse_irreps(hidden))
    tips, key = [], "model.hidden.lmax"
    if any(l > top + model["edge_attrs"]["lmax"] for l, _ in missing):
        tips.append(f"raise model.hidden.lmax or model.edge_attrs.lmax (now {top} + "
                    f"{model['edge_attrs']['lmax']}) to reach order {max(l for l, _ in missing)}")
    if any(p != (-1) ** l for l, p in missing):
        if model["hidden"]["irreps"]:
            tips.append("add the odd-parity irreps to model.hidden.irreps")
            key = "model.hidden.irreps"
        else:
            tips.append("set model.hidden.parity: both")
            key = "model.hidden.parity" if not tips[:-1] else key
    return "; ".join(tips) or "widen model.hidden", key


def check_points(study, sink: Sink):
    """Append a located problem for each distinct failure over the checked points."""
    dims = _relevant(study)
    seen = set()
    for combo in _points(dims):
        point = dict(zip((d.name for d in dims), combo))
        try:
            cfg = study.resolve(point, strict=False)
        except UserError as err:
            for problem in err.problems:
                if problem.render() not in seen:
                    seen.add(problem.render())
                    sink.problems.append(problem)
            continue
        if cfg["model"]["family"] not in EQUIVARIANT_FAMILIES:
            continue
        fields = task_fields(cfg["task"])
        hidden = hidden_irreps(cfg["model"]["hidden"], cfg["model"]["width"])
        reach = reachable_irreps(hidden, cfg["model"]["edge_attrs"]["lmax"])
        for name, field in fields.items():
            if field["role"] != "target":
                continue
            missing = [(l, p) for _, l, p in parse_irreps(field["irreps"]) if (l, p) not in reach]
            if not missing:
                continue
            tip, key = _advice(missing, cfg, hidden)
            if (name, tuple(missing), key) in seen:
                continue
            seen.add((name, tuple(missing), key))
            shown = "+".join(f"{l}{'e' if p > 0 else 'o'}" for l, p in missing)
            at = ", ".join(f"{k}={v!r}" for k, v in point.items())
            sink.add(f"target field {name!r} ({field['irreps']}) is unreachable: {shown} cannot "
                     f"come from hidden {hidden} with edge SH lmax "
                     f"{cfg['model']['edge_attrs']['lmax']}" + (f" (at {at})" if at else "") +
                     f"; {tip}", tuple(key.split(".")))
