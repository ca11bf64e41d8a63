"""Dimensions of a search space and the collector of located problems.

A dimension is a mapping with exactly one form key (``one_of``, ``whole``, ``real``,
``derive``) and optional ``step``/``log``/``only_if``.  Choices whose items are not plain
values (lists such as node-input subsets) get text labels for Optuna, e.g.
``"velocity+pressure"``, and are mapped back when a trial is resolved.
"""
from __future__ import annotations

import difflib
import json
from dataclasses import dataclass, field

from searcher.errors import Problem
from searcher.spec._derive import DeriveError, Expression
from searcher.spec._rules import Real, Rule, Whole, _is_int, _is_real

__all__ = ["Dimension", "Sink", "FORMS", "is_dimension", "parse_dimension", "did_you_mean"]

FORMS = ("one_of", "whole", "real", "derive")
_EXTRAS = {"one_of": ("only_if",), "whole": ("step", "log", "only_if"),
           "real": ("log", "only_if"), "derive": ("only_if",)}
KINDS = {"one_of": "choice", "whole": "int", "real": "float", "derive": "derived"}


def did_you_mean(word: str, options) -> str:
    close = difflib.get_close_matches(str(word), list(options), n=1, cutoff=0.6)
    return f"; did you mean {close[0]!r}?" if close else ""


def is_dimension(value) -> bool:
    return isinstance(value, dict) and any(k in value for k in FORMS)


class Sink:
    """Collects located problems; ``where`` finds the nearest recorded position of a path."""

    def __init__(self, values: dict, keys: dict, file: str):
        self.values, self.keys, self.file = values, keys, file
        self.problems: list[Problem] = []

    def where(self, path: tuple, key: bool = False):
        table = self.keys if key else self.values
        probe = tuple(path)
        while probe:
            if probe in table:
                return table[probe]
            if probe in self.keys:
                return self.keys[probe]
            probe = probe[:-1]
        return None

    def add(self, message: str, path: tuple, *, key: bool = False, at: tuple | None = None):
        pos = self.where(at if at is not None else path, key=key)
        self.problems.append(Problem(
            message, file=pos.file if pos else self.file, line=pos.line if pos else 0,
            column=pos.column if pos else 0, path=".".join(str(p) for p in path)))


@dataclass
class Dimension:
    """One searched (or derived) key.  ``name`` is the dotted key path used by Optuna."""

    name: str
    kind: str
    only_if: dict = field(default_factory=dict)
    default: object = None
    options: tuple = ()
    labels: tuple = ()
    lo: float | int | None = None
    hi: float | int | None = None
    step: int = 1
    log: bool = False
    expr: Expression | None = None

    def contains(self, value) -> bool:
        if self.kind == "choice":
            return value in self.options
        if self.kind == "int":
            return _is_int(value) and self.lo <= value <= self.hi and (value - self.lo) % self.step == 0
        if self.kind == "float":
            return _is_real(value) and self.lo <= value <= self.hi
        return True

    def size(self) -> int | None:
        """Number of values for choices and whole ranges; None for real and derived."""
        if self.kind == "choice":
            return len(self.options)
        if self.kind == "int":
            return (self.hi - self.lo) // self.step + 1
        return None

    def extremes(self) -> list:
        if self.kind == "choice":
            return list(self.options) if len(self.options) <= 2 else [self.options[0], self.options[-1]]
        return [self.lo, self.hi] if self.lo != self.hi else [self.lo]

    def values(self) -> list:
        if self.kind == "choice":
            return list(self.options)
        return list(range(self.lo, self.hi + 1, self.step))

    def value_of(self, label):
        """Map an Optuna value (label or plain option) back to the option."""
        if label in self.labels:
            return self.options[self.labels.index(label)]
        return label

    def spec(self) -> dict:
        """Canonical description, used for the study hash."""
        out = {"kind": self.kind, "only_if": {k: self.only_if[k] for k in sorted(self.only_if)}}
        if self.kind == "choice":
            out["options"] = list(self.options)
        elif self.kind == "derived":
            out["derive"] = self.expr.text
        else:
            out.update(lo=self.lo, hi=self.hi, step=self.step, log=self.log)
        return out


def _labels(options: list) -> tuple:
    def label(item):
        if isinstance(item, list) and all(isinstance(i, str) and "+" not in i for i in item):
            return "+".join(item) if item else "(none)"
        return json.dumps(item, sort_keys=True)
    if all(isinstance(o, (str, int, float, bool)) or o is None for o in options):
        return tuple(options)
    labels = tuple(label(o) for o in options)
    return labels if len(set(labels)) == len(labels) else tuple(json.dumps(o) for o in options)


def _range(raw, form: str, sink: Sink, path: tuple):
    pair = raw.get(form)
    where = path + (form,)
    number = _is_int if form == "whole" else _is_real
    if not (isinstance(pair, list) and len(pair) == 2 and all(number(v) for v in pair)):
        kind = "whole numbers" if form == "whole" else "numbers"
        sink.add(f"{form} needs a pair [lo, hi] of {kind}, got {pair!r}", path, at=where)
        return None
    lo, hi = pair
    if lo > hi:
        sink.add(f"inverted range [{lo}, {hi}]: lo must not exceed hi", path, at=where)
        return None
    if lo == hi:
        sink.add(f"empty range [{lo}, {hi}]: it holds one value; write the plain value instead",
                 path, at=where)
        return None
    return lo, hi


def parse_dimension(path: tuple, raw: dict, rule: Rule, default, sink: Sink) -> Dimension | None:
    """Check one dimension mapping against the key's rule; problems go to ``sink``.

    Returns:
        The dimension (``only_if`` unchecked, see ``_checks``) or None when it is invalid.
    """
    dotted = ".".join(path)
    forms = [k for k in FORMS if k in raw]
    if len(forms) > 1:
        sink.add(f"a dimension has exactly one of {', '.join(FORMS)}; got {', '.join(forms)}", path)
        return None
    form = forms[0]
    ok = True
    for key in raw:
        if key != form and key not in _EXTRAS[form]:
            sink.add(f"unknown key {key!r} in a {form} dimension; allowed: "
                     f"{', '.join((form,) + _EXTRAS[form])}{did_you_mean(key, _EXTRAS[form])}",
                     path + (key,), key=True)
            ok = False
    only_if = raw.get("only_if", {})
    if "only_if" in raw and (not isinstance(only_if, dict) or not only_if):
        sink.add(f"only_if needs a mapping of dotted key -> value or list, got {only_if!r}",
                 path, at=path + ("only_if",))
        ok, only_if = False, {}
    dim = Dimension(dotted, KINDS[form], only_if=only_if, default=default)
    if form == "one_of":
        options = raw["one_of"]
        if not isinstance(options, list) or not options:
            sink.add(f"one_of needs a non-empty list of options, got {options!r}", path,
                     at=path + ("one_of",))
            return None
        for i, option in enumerate(options):
            why = rule.problem(option)
            if why:
                sink.add(f"option {option!r} is not allowed; allowed: {why}", path,
                         at=path + ("one_of", i))
                ok = False
            if option in options[:i]:
                sink.add(f"option {option!r} is listed twice", path, at=path + ("one_of", i))
                ok = False
        dim.options, dim.labels = tuple(options), _labels(options)
    elif form == "derive":
        if not rule.numeric:
            sink.add("derive gives a number, but this key takes " + rule.problem(None), path,
                     at=path + ("derive",))
            return None
        try:
            dim.expr = Expression(raw["derive"])
        except DeriveError as exc:
            sink.add(f"derive {raw['derive']!r}: {exc}", path, at=path + ("derive",))
            return None
    else:
        if form == "real" and not isinstance(rule, Real):
            sink.add(f"this key takes {rule.problem(None)}; use whole: [lo, hi] instead of real",
                     path, at=path + (form,))
            return None
        if form == "whole" and not isinstance(rule, Whole):
            sink.add(f"whole ranges are for whole-number keys; this key takes {rule.problem(None)}",
                     path, at=path + (form,))
            return None
        bounds = _range(raw, form, sink, path)
        if bounds is None:
            return None
        dim.lo, dim.hi = bounds
        for end in bounds:
            why = rule.problem(end)
            if why:
                sink.add(f"range end {end!r} is outside what the key allows: {why}", path,
                         at=path + (form,))
                ok = False
        dim.log = raw.get("log", False)
        if not isinstance(dim.log, bool):
            sink.add(f"log must be true or false, got {dim.log!r}", path, at=path + ("log",))
            return None
        if dim.log and dim.lo <= 0:
            sink.add(f"log range needs lo > 0, got [{dim.lo}, {dim.hi}]", path, at=path + (form,))
            ok = False
        if form == "whole":
            step = raw.get("step", 1)
            if not _is_int(step) or step < 1:
                sink.add(f"step must be a whole number >= 1, got {step!r}", path,
                         at=path + ("step",))
                return None
            if (dim.hi - dim.lo) % step:
                sink.add(f"step {step} does not divide the range [{dim.lo}, {dim.hi}] "
                         f"(hi - lo = {dim.hi - dim.lo})", path, at=path + ("step",))
                ok = False
            if dim.log and step != 1:
                sink.add(f"a log range takes no step (got step {step})", path,
                         at=path + ("step",))
                ok = False
            dim.step = step
    if not ok:
        return None
    if dim.kind != "derived" and not dim.contains(default):
        # the key's default lies outside the space: use the space's first value instead
        dim.default = dim.options[0] if dim.kind == "choice" else dim.lo
    if dim.kind == "float":
        dim.lo, dim.hi = float(dim.lo), float(dim.hi)
        dim.default = float(dim.default)
    return dim
