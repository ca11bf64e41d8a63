"""Declared constraints for every key of ``defaults.yaml`` (validated at one door).

Each key has one rule object (the names of registries come from :mod:`searcher.options`); a rule says whether a plain value is allowed (returning what
*is* allowed when not) and how it looks in JSON Schema.  Cross-key rules (fields named by
the model, pruner budget vs epochs, reachability) live in ``_checks.py``.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass

from searcher.options import AUGMENT_MODES, DATA_DERIVED, REGISTERED
from searcher.spec._irreps import FIELD_KINDS, parse_irreps

__all__ = ["Rule", "Whole", "Real", "RealOrWord", "OneOf", "Flag", "Text", "Names", "Irreps", "Fractions",
           "Fields", "FIELD_ROLES", "RULES", "DEMO_FAMILIES", "STRESS_SETS", "EDGE_INVARIANTS",
           "VARYING_SECTIONS", "NAME_PATTERN", "RENAMED_KEYS", "RENAMED_VALUES",
           "MEANING_NOTES"]

VARYING_SECTIONS = ("model", "training")
NAME_PATTERN = r"|[A-Za-z0-9_-]+"
DEMO_FAMILIES = ("abc", "taylor_green", "burgers", "lamb_oseen", "strain", "sphere")
STRESS_SETS = ("rotated", "reflected", "translated", "unseen_family", "denser", "sparser")
EDGE_INVARIANTS = ("distance", "speed_jump", "pressure_jump", "radial_velocity")


def _is_int(v) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _is_real(v) -> bool:
    return (_is_int(v) or isinstance(v, float)) and math.isfinite(v)


class Rule:
    """Base of all rules: ``problem(value)`` is None when allowed, else what is allowed."""

    numeric = False

    def problem(self, value) -> str | None:
        raise NotImplementedError

    def schema(self) -> dict:
        raise NotImplementedError


@dataclass(frozen=True)
class Whole(Rule):
    lo: int | None = None
    hi: int | None = None
    numeric = True

    def allowed(self) -> str:
        if self.hi is None:
            return f"a whole number >= {self.lo}"
        return f"a whole number in [{self.lo}, {self.hi}]"

    def problem(self, value):
        if not _is_int(value) or (self.lo is not None and value < self.lo) or \
                (self.hi is not None and value > self.hi):
            return self.allowed()
        return None

    def schema(self):
        out = {"type": "integer"}
        if self.lo is not None:
            out["minimum"] = self.lo
        if self.hi is not None:
            out["maximum"] = self.hi
        return out


@dataclass(frozen=True)
class Real(Rule):
    lo: float | None = None
    hi: float | None = None
    lo_open: bool = False
    hi_open: bool = False
    numeric = True

    def allowed(self) -> str:
        left = ("(" if self.lo_open else "[") + ("-inf" if self.lo is None else f"{self.lo:g}")
        right = ("inf" if self.hi is None else f"{self.hi:g}") + (")" if self.hi_open else "]")
        return f"a number in {left}, {right}"

    def problem(self, value):
        if not _is_real(value):
            return self.allowed()
        if self.lo is not None and (value < self.lo or (self.lo_open and value == self.lo)):
            return self.allowed()
        if self.hi is not None and (value > self.hi or (self.hi_open and value == self.hi)):
            return self.allowed()
        return None

    def schema(self):
        out = {"type": "number"}
        if self.lo is not None:
            out["exclusiveMinimum" if self.lo_open else "minimum"] = self.lo
        if self.hi is not None:
            out["exclusiveMaximum" if self.hi_open else "maximum"] = self.hi
        return out


@dataclass(frozen=True)
class RealOrWord(Real):
    """A number as for :class:`Real`, or one word that stands for a value the data decide."""

    word: str = ""

    def allowed(self) -> str:
        return f"{super().allowed()}, or {self.word!r}"

    def problem(self, value):
        return None if value == self.word else super().problem(value)

    def schema(self):
        return {"anyOf": [super().schema(), {"const": self.word}]}


@dataclass(frozen=True)
class OneOf(Rule):
    options: tuple

    def problem(self, value):
        return None if isinstance(value, str) and value in self.options else \
            "one of: " + ", ".join(self.options)

    def schema(self):
        return {"enum": list(self.options)}


@dataclass(frozen=True)
class Flag(Rule):
    def problem(self, value):
        return None if isinstance(value, bool) else "true or false"

    def schema(self):
        return {"type": "boolean"}


@dataclass(frozen=True)
class Text(Rule):
    pattern: str = ""
    meaning: str = "text"

    def problem(self, value):
        if not isinstance(value, str) or "\0" in value:
            return self.meaning
        if self.pattern and not re.fullmatch(self.pattern, value):
            return self.meaning
        return None

    def schema(self):
        return {"type": "string", **({"pattern": f"^(?:{self.pattern})$"} if self.pattern else {})}


@dataclass(frozen=True)
class Names(Rule):
    """A list of distinct names; ``options`` empty means the names are checked elsewhere."""

    options: tuple = ()
    nonempty: bool = False

    def problem(self, value):
        what = ("a non-empty " if self.nonempty else "a ") + "list of distinct names" + \
            (" from: " + ", ".join(self.options) if self.options else "")
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value) or \
                len(set(value)) != len(value) or (self.nonempty and not value):
            return what
        if self.options and not set(value) <= set(self.options):
            return what
        return None

    def schema(self):
        items = {"enum": list(self.options)} if self.options else {"type": "string"}
        return {"type": "array", "items": items, "uniqueItems": True,
                **({"minItems": 1} if self.nonempty else {})}


@dataclass(frozen=True)
class Irreps(Rule):
    """An e3nn irreps string, or "" for "not set"."""

    def problem(self, value):
        if value == "":
            return None
        try:
            terms = parse_irreps(value)
        except ValueError as exc:
            return f"an irreps string like '16x0e+8x1o' or \"\" ({exc})"
        if not any(l == 0 and p == 1 for _, l, p in terms):
            return "irreps holding scalars 0e (gates and norms need them)"
        return None

    def schema(self):
        return {"type": "string", "pattern": r"^(\s*(\d+\s*x\s*)?\d+[eo]\s*(\+\s*(\d+\s*x\s*)?\d+[eo]\s*)*)?$"}


@dataclass(frozen=True)
class Fractions(Rule):
    def problem(self, value):
        ok = isinstance(value, list) and len(value) == 3 and all(_is_real(v) and v > 0 for v in value)
        if not ok or abs(sum(value) - 1.0) > 1e-9:
            return "three positive numbers (train, val, test) summing to 1"
        return None

    def schema(self):
        return {"type": "array", "items": {"type": "number", "exclusiveMinimum": 0},
                "minItems": 3, "maxItems": 3}


# ``baseline``: a reference prediction of the target read from the files (``of: <target>``),
# for example the solver's own closure; it is scored in the dossier and never a model input.
FIELD_ROLES = ("input", "target", "baseline")
_FIELD_KEYS = {"kind": OneOf(tuple(FIELD_KINDS)), "role": OneOf(FIELD_ROLES),
               "level": OneOf(("node", "graph")), "at": OneOf(("points", "cells")),
               "of": Text(r"[A-Za-z_][A-Za-z0-9_]*", "the name of the target field")}


@dataclass(frozen=True)
class Fields(Rule):
    """``task.fields``: name -> {kind, role, level}; checked key by key in ``_checks``."""

    keys = _FIELD_KEYS

    def problem(self, value):
        return None if isinstance(value, dict) else "a mapping of field name -> {kind, role, level}"

    def schema(self):
        entry = {"type": "object", "properties": {k: r.schema() for k, r in _FIELD_KEYS.items()},
                 "required": ["kind", "role"], "additionalProperties": False}
        return {"type": "object", "propertyNames": {"pattern": r"^[A-Za-z_][A-Za-z0-9_]*$"},
                "additionalProperties": entry}


# Names a study may still carry from before a rename: old dotted key -> what to write now, and
# (dotted key, old value) -> the new value.  They give a located error naming the new name.
RENAMED_KEYS = {"search.pruner.threshold": "margin (the chance below which outlook prunes; "
                                           "the decades above the k-th best are now headroom)"}
RENAMED_VALUES = {("search.pruner.kind", "curve_fit"): "outlook"}
# A key whose meaning changed keeps a note for values only the old meaning allowed.
MEANING_NOTES = {"search.pruner.margin": "margin is the chance below which outlook prunes; "
                                         "decades above the k-th best are now headroom"}

_POS = Real(0, None, lo_open=True)
RULES: dict[str, Rule] = {
    "study.name": Text(NAME_PATTERN, "a name of letters, digits, '-' and '_', or \"\" for the "
                                     "file's name (it names the output folder)"),
    "study.summary": Text(), "study.team": Text(),
    "task.source": Text(r".+", "\"demo\" or a path to data files"),
    "task.demo.samples": Whole(3), "task.demo.probes": Whole(2),
    "task.demo.families": Names(DEMO_FAMILIES, nonempty=True),
    "task.demo.region": _POS, "task.demo.reflect": Flag(), "task.demo.seed": Whole(0),
    "task.fields": Fields(), "task.mesh_edges": Flag(),
    "task.graph.rule": OneOf(("radius", "neighbours")), "task.graph.radius": _POS,
    "task.graph.neighbours": Whole(1), "task.graph.edge_cap": Whole(0),
    "task.split.fractions": Fractions(), "task.split.seed": Whole(0),
    "task.split.hold_out": Names(), "task.split.stress": Names(STRESS_SETS),
    "task.split.shift": Real(0), "task.split.by": OneOf(("case", "sample")),
    "task.patches.size": Whole(0), "task.patches.halo": Whole(0),
    "task.fidelity.train_fraction": Real(0, 1, lo_open=True), "task.fidelity.probes": Whole(0),
    "model.family": OneOf(REGISTERED["model.family"]),
    "model.hidden.irreps": Irreps(), "model.hidden.lmax": Whole(0, 8),
    "model.hidden.multiplicity": Whole(1, 1024),
    "model.hidden.taper": OneOf(("uniform", "tapered", "balanced")),
    "model.hidden.parity": OneOf(("natural", "both")),
    "model.edge_attrs.lmax": Whole(0, 8),
    "model.edge_attrs.extra_vector": Text(r"|[A-Za-z_][A-Za-z0-9_]*", "\"\" or a field name"),
    "model.node_attrs": OneOf(("mean_edge", "field", "both", "none")),
    "model.node_attr_field": Text(r"[A-Za-z_][A-Za-z0-9_]*", "a field name"),
    "model.node_inputs": Names(nonempty=True),
    "model.edge_invariants": Names(EDGE_INVARIANTS),
    "model.radial.basis": OneOf(REGISTERED["model.radial.basis"]),
    "model.radial.count": Whole(1, 128),
    "model.radial.cutoff": RealOrWord(0, None, lo_open=True,
                                      word=DATA_DERIVED["model.radial.cutoff"]),
    "model.radial.envelope": OneOf(REGISTERED["model.radial.envelope"]),
    "model.radial.power": Whole(1, 32),
    "model.radial.scale": OneOf(("absolute", "local")),
    "model.layers": Whole(1, 32), "model.norm": OneOf(("none", "batch", "instance")),
    "model.residual": Flag(), "model.input_products": Flag(), "model.aggregate": OneOf(("sum", "mean", "degree")),
    "model.activation": OneOf(REGISTERED["model.activation"]),
    "model.width": Whole(1, 4096),
    "model.augment": OneOf(AUGMENT_MODES),
    "training.epochs": Whole(1), "training.batch_size": Whole(1),
    "training.optimiser": OneOf(("adam", "adamw")), "training.learning_rate": _POS,
    "training.weight_decay": Real(0), "training.schedule": OneOf(("constant", "cosine", "plateau")),
    "training.warmup_epochs": Whole(0), "training.clip": Real(0), "training.seed": Whole(0),
    "training.device": OneOf(("cpu", "auto")), "training.time_limit": _POS,
    "training.diverge_factor": Real(1, None, lo_open=True),
    "search.sampler.kind": OneOf(REGISTERED["search.sampler.kind"]),
    "search.sampler.startup": Whole(0), "search.sampler.candidates": Whole(1),
    "search.sampler.multivariate": Flag(),
    "search.pruner.kind": OneOf(REGISTERED["search.pruner.kind"]),
    "search.pruner.min_epochs": Whole(1), "search.pruner.max_epochs": Whole(1),
    "search.pruner.eta": Whole(2), "search.pruner.percentile": Real(0, 100, True, True),
    "search.pruner.warmup": Whole(0), "search.pruner.margin": Real(0, 1, True, True),
    "search.pruner.rank": Whole(1),
    "search.pruner.headroom": Real(0, 6),
    "search.budget.trials": Whole(1), "search.budget.hours": Real(0),
    "search.budget.until": Text(r"|([01]\d|2[0-3]):[0-5]\d", "\"\" or a clock time HH:MM"),
    "search.workers": Whole(1, 1024), "search.seed": Whole(0), "search.storage": Text(),
    "search.heartbeat": Whole(1, 3600),
    "search.guard.max_params": Whole(0), "search.guard.max_cost": Real(0),
    "search.keep_best": Whole(0),
    "tracking.uri": Text(), "tracking.experiment": Text(),
    "output.folder": Text(),
}
