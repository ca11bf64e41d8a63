"""The compiled study: load, validate, and turn dimensions into Optuna suggestions.

``load_study`` is the one door: it merges ``extends`` chains, checks every key against the
declared rules, checks conditions, derived values and reachability of the target, and
raises one :class:`UserError` holding every problem found.
"""
from __future__ import annotations

import copy
import hashlib
import json
import math
import random
import re
from functools import lru_cache
from pathlib import Path

from searcher.errors import Problem, UserError
from searcher.spec._checks import check_links, check_tree, condition_values, get, leaf_paths, order_dims
from searcher.spec._derive import DeriveError
from searcher.spec._dims import Dimension, Sink, is_dimension
from searcher.spec._load import load_merged
from searcher.spec._rules import NAME_PATTERN, RULES, Real, Whole
from searcher.spec._yaml import read_yaml

__all__ = ["Study", "load_study", "config_hash", "defaults"]

DEFAULTS_FILE = Path(__file__).with_name("defaults.yaml")
_NOT_HASHED = ("study.summary", "study.team")  # prose: editing it keeps the same space


@lru_cache(maxsize=1)
def _defaults() -> dict:
    return read_yaml(DEFAULTS_FILE).data


def defaults() -> dict:
    """A fresh copy of the embedded defaults (every key of a resolved config)."""
    return copy.deepcopy(_defaults())


def _set(cfg: dict, dotted: str, value):
    *head, last = dotted.split(".")
    for part in head:
        cfg = cfg[part]
    cfg[last] = value


def _canonical(obj) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), allow_nan=False)


def config_hash(config: dict) -> str:
    """sha256 of a resolved config written as canonical JSON (sorted keys, no spaces)."""
    return hashlib.sha256(_canonical(config).encode()).hexdigest()


def _coerce(dotted: str, value):
    if isinstance(RULES.get(dotted), Real) and not isinstance(value, (bool, str)):
        return float(value)
    return copy.deepcopy(value)


def _fixed(data: dict, defaults_: dict, dims: dict, path: tuple = ()) -> dict:
    """Defaults overlaid with the valid plain values of ``data``; dimensions at defaults."""
    out = copy.deepcopy(defaults_)
    for key, value in data.items():
        dotted = ".".join(path + (key,))
        if key not in defaults_:
            continue
        if isinstance(defaults_[key], dict) and dotted not in RULES:
            if isinstance(value, dict) and not is_dimension(value):
                out[key] = _fixed(value, defaults_[key], dims, path + (key,))
        elif dotted in dims:
            out[key] = _coerce(dotted, dims[dotted].default)
        elif not is_dimension(value) and RULES[dotted].problem(value) is None:
            out[key] = _coerce(dotted, value)
    return out


class _Draw:
    """A trial-like object drawing uniformly from a seeded :class:`random.Random`
    (``random()`` is reproducible across Python versions)."""

    def __init__(self, rng: random.Random):
        self.rng = rng

    def suggest_categorical(self, name, choices):
        return choices[min(int(self.rng.random() * len(choices)), len(choices) - 1)]

    def suggest_int(self, name, low, high, step=1, log=False):
        if log:
            value = round(math.exp(self.rng.uniform(math.log(low), math.log(high))))
            return min(max(value, low), high)
        return low + step * self.suggest_categorical(name, range((high - low) // step + 1))

    def suggest_float(self, name, low, high, log=False):
        if log:
            return min(max(math.exp(self.rng.uniform(math.log(low), math.log(high))), low), high)
        return min(max(self.rng.uniform(low, high), low), high)


class Study:
    """A validated study.  Build it with :func:`load_study`.

    Example:
        >>> study = load_study("studies/demo.yaml")
        >>> cfg = study.sample(1, seed=0)[0]
        >>> cfg["model"]["family"] in ("steerable", "gated")
        True
    """

    def __init__(self, path: Path, raw: dict, base: dict, dimensions: list[Dimension], sink: Sink):
        self.path, self.raw, self._base, self._sink = path, raw, base, sink
        self.dimensions = dimensions
        self.name = base["study"]["name"]
        self.output_dir = Path(base["output"]["folder"] or f"runs/{self.name}")
        self.conditional_dimensions = [d.name for d in dimensions if d.only_if]
        sizes = [d.size() for d in dimensions if d.kind in ("choice", "int")]
        self.discrete_size = math.prod(sizes)
        space = copy.deepcopy(base)
        for dim in dimensions:
            _set(space, dim.name, dim.spec())
        for dotted in _NOT_HASHED:
            _set(space, dotted, "")
        self.hash = config_hash(space)

    def _active(self, dim: Dimension, cfg: dict) -> bool:
        return all(get(cfg, key) in condition_values(key, allowed)
                   for key, allowed in dim.only_if.items())

    def _derive(self, dim: Dimension, cfg: dict):
        at = tuple(dim.name.split("."))
        try:
            value = dim.expr.evaluate({n: get(cfg, n) for n in dim.expr.names})
        except DeriveError as exc:
            raise UserError([self._problem(f"derive {dim.expr.text!r}: {exc}", at)]) from None
        rule = RULES[dim.name]
        if isinstance(rule, Whole) and isinstance(value, float) and value.is_integer():
            value = int(value)
        why = rule.problem(value)
        if why:
            raise UserError([self._problem(
                f"derive {dim.expr.text!r} gives {value!r}; allowed: {why}", at)])
        return value

    def locate(self, message: str, dotted: str) -> Problem:
        """A problem found after loading (e.g. by a command), located at key ``dotted``."""
        sink = Sink(self._sink.values, self._sink.keys, str(self.path))
        sink.add(message, tuple(dotted.split(".")))
        return sink.problems[0]

    def _problem(self, message: str, at: tuple):
        sink = Sink(self._sink.values, self._sink.keys, str(self.path))
        sink.add(message, at, at=at + ("derive",))
        return sink.problems[0]

    def _walk(self, pick) -> dict:
        cfg = copy.deepcopy(self._base)
        for dim in self.dimensions:
            if not self._active(dim, cfg):
                value = dim.default
            elif dim.kind == "derived":
                value = self._derive(dim, cfg)
            else:
                value = pick(dim)
            _set(cfg, dim.name, _coerce(dim.name, value))
        return cfg

    def suggest(self, trial) -> dict:
        """Resolved config from an Optuna trial (conditions and derived values honoured).

        Choices whose options are lists are suggested as text labels, e.g. ``"velocity+pressure"``.
        """
        def pick(dim: Dimension):
            if dim.kind == "choice":
                return dim.value_of(trial.suggest_categorical(dim.name, list(dim.labels)))
            if dim.kind == "int":
                return trial.suggest_int(dim.name, dim.lo, dim.hi, step=dim.step, log=dim.log)
            return trial.suggest_float(dim.name, dim.lo, dim.hi, log=dim.log)
        return self._walk(pick)

    def resolve(self, params: dict, *, strict: bool = True) -> dict:
        """Resolved config from dotted name -> value (as in ``trial.params``).

        Args:
            params: values of the active searched dimensions (labels or options for choices).
            strict: when False, missing dimensions take their defaults.

        Raises:
            UserError: unknown names, values outside their dimension, or (strict) missing ones.
        """
        known = {d.name: d for d in self.dimensions if d.kind != "derived"}
        problems = [f"{n!r} is not a searched dimension of {self.name}" for n in params if n not in known]

        def pick(dim: Dimension):
            if dim.name not in params:
                if strict:
                    problems.append(f"{dim.name} is active but has no value")
                return dim.default
            value = dim.value_of(params[dim.name])
            if not dim.contains(value):
                problems.append(f"{dim.name}={params[dim.name]!r} is outside the dimension")
                return dim.default
            return value
        cfg = self._walk(pick)
        if problems:
            raise UserError.single("; ".join(problems), file=str(self.path))
        return cfg

    def fixed(self) -> dict:
        """Resolved config with every searched dimension at its default."""
        return self._walk(lambda dim: dim.default)

    def least(self, dotted: str):
        """The smallest number key ``dotted`` can take in this study's trials: its fixed
        value, a range's low end or the least numeric choice (and the default while a
        condition leaves it inactive); None when derived or when it takes no number."""
        dim = next((d for d in self.dimensions if d.name == dotted), None)
        if dim is None:
            values = [get(self.fixed(), dotted)]
        elif dim.kind == "derived":
            return None
        else:
            values = list(dim.options) if dim.kind == "choice" else [dim.lo]
            values += [dim.default] if dim.only_if else []
        numbers = [v for v in values if isinstance(v, (int, float)) and not isinstance(v, bool)]
        return min(numbers) if numbers else None

    def sample(self, k: int, seed: int = 0) -> list[dict]:
        """``k`` resolved configs drawn uniformly; the same seed gives the same list."""
        draw = _Draw(random.Random(seed))
        return [self.suggest(draw) for _ in range(k)]

    def params_of(self, cfg: dict) -> dict:
        """The searched values of a resolved config (dotted name -> value)."""
        return {d.name: get(cfg, d.name) for d in self.dimensions if d.kind != "derived"}


def _sorted(problems: list) -> list:
    # reported in file order, whatever order the checks ran in
    return sorted(problems, key=lambda p: (p.file, p.line, p.column))


def _name_from_file(base: dict, path: Path, sink: Sink) -> None:
    """``study.name: ""`` (the default) takes the file's stem; ``extends`` never passes a
    name on (``_load``), so a study built on the demo's file is not the demo."""
    if base["study"]["name"]:
        return
    if re.fullmatch(NAME_PATTERN, path.stem) and path.stem:
        base["study"]["name"] = path.stem
    else:
        sink.add(f"the file name {path.stem!r} cannot name the study (letters, digits, '-' "
                 "and '_' only): set study.name", ("study", "name"), at=())


def load_study(path: Path | str) -> Study:
    """Load, merge, validate and compile a study file.

    Raises:
        UserError: with every problem found, each located by file, line, column and key.
    """
    from searcher.spec._reach import check_points  # reachability needs the compiled study

    path = Path(path)
    located, problems = load_merged(path)
    sink = Sink(located.values, located.keys, str(path))
    sink.problems = problems
    defaults_ = _defaults()
    dims = check_tree(located.data, defaults_, sink)
    base = _fixed(located.data, defaults_, dims)
    _name_from_file(base, path, sink)
    leaves = leaf_paths(defaults_)
    check_links(dims, base, leaves, sink)
    # defaults order, so dimension lists read the same whatever order the files used
    ordered = order_dims({n: dims[n] for n in sorted(dims, key=leaves.index)}, sink)
    if sink.problems:
        raise UserError(_sorted(sink.problems))
    study = Study(path, located.data, base, ordered, sink)
    check_points(study, sink)
    if sink.problems:
        raise UserError(_sorted(sink.problems))
    return study
