"""Validation of a merged study against ``defaults.yaml`` and the declared rules.

Every check appends to one :class:`Sink`, so a user sees all problems of a file at once.
Structural checks come first (unknown keys, types, dimension forms), then the rules that
tie keys together (conditions, derived names and cycles, fields named by the model, pruner
budget vs epochs).
"""
from __future__ import annotations

from searcher.spec._dims import (FORMS, Dimension, Sink, did_you_mean, is_dimension,
                                 parse_dimension)
from searcher.spec._rules import (MEANING_NOTES, RENAMED_KEYS, RENAMED_VALUES, RULES,
                                  VARYING_SECTIONS, Fields, Fractions, Names)
from searcher.spec._irreps import FIELD_KINDS, task_fields

__all__ = ["check_tree", "check_links", "leaf_paths", "get", "flatten", "condition_values",
           "order_dims"]


def leaf_paths(tree: dict, path: tuple = ()) -> list[str]:
    """Dotted paths of every leaf key of ``tree`` (defaults order)."""
    out = []
    for key, value in tree.items():
        dotted = ".".join(path + (key,))
        if isinstance(value, dict) and dotted not in RULES:
            out += leaf_paths(value, path + (key,))
        else:
            out.append(dotted)
    return out


def flatten(cfg: dict, prefix: str = "") -> dict:
    """A resolved (sub)config as ``{dotted path: value}``; mapping-valued keys such as
    ``task.fields`` stay whole.  ``prefix`` is the section path when ``cfg`` is one section.

    Example:
        >>> flatten({"hidden": {"lmax": 2}, "layers": 3}, "model")
        {'model.hidden.lmax': 2, 'model.layers': 3}
    """
    base = tuple(prefix.split(".")) if prefix else ()
    return {path: get(cfg, path[len(prefix) + 1:] if prefix else path)
            for path in leaf_paths(cfg, base)}


def get(cfg: dict, dotted: str):
    for part in dotted.split("."):
        cfg = cfg[part]
    return cfg


def condition_values(dotted: str, allowed) -> list:
    """The values an ``only_if`` entry accepts (a list of lists for list-valued keys)."""
    list_key = isinstance(RULES.get(dotted), (Names, Fractions))
    if isinstance(allowed, list) and (not list_key or all(isinstance(a, list) for a in allowed)):
        return allowed
    return [allowed]


def check_tree(data: dict, defaults: dict, sink: Sink, path: tuple = ()) -> dict[str, Dimension]:
    """Check keys, types and dimension forms; returns the dimensions by dotted name."""
    dims: dict[str, Dimension] = {}
    for key, value in data.items():
        here = path + (key,)
        dotted = ".".join(here)
        if key not in defaults and dotted in RENAMED_KEYS:
            sink.add(f"{key!r} was renamed: write {RENAMED_KEYS[dotted]}", here, key=True)
            continue
        if key not in defaults:
            # extends is read (and removed) while the files are merged, so add it back here
            names = [*defaults, "extends"] if not path else list(defaults)
            near = did_you_mean(key, names)
            if not near:  # a key put in the wrong section: suggest its full path
                near = did_you_mean(dotted, [p for p in leaf_paths(defaults, path)
                                             if p.rsplit(".", 1)[-1] == key] or ["-"])
            allowed = ", ".join(names) if len(names) < 12 else "see searcher/spec/defaults.yaml"
            sink.add(f"unknown key {key!r}{near} (allowed here: {allowed})", here, key=True)
            continue
        default = defaults[key]
        if isinstance(default, dict) and dotted not in RULES:
            if is_dimension(value):
                sink.add("dimensions are allowed on single keys only, not on a whole section",
                         here)
            elif not isinstance(value, dict):
                sink.add(f"expected a mapping of keys, got {value!r}", here)
            else:
                dims.update(check_tree(value, default, sink, here))
            continue
        rule = RULES[dotted]
        if is_dimension(value) and not isinstance(rule, Fields):
            if here[0] not in VARYING_SECTIONS:
                sink.add(f"{here[0]} keys are fixed; dimensions are allowed under "
                         f"{' and '.join(VARYING_SECTIONS)} only", here)
                continue
            dim = parse_dimension(here, value, rule, default, sink)
            if dim is not None:
                dims[dotted] = dim
            continue
        why = rule.problem(value)
        if isinstance(value, str) and (dotted, value) in RENAMED_VALUES:
            sink.add(f"{value!r} was renamed: write {RENAMED_VALUES[dotted, value]!r}", here)
        elif why and isinstance(value, dict):
            # a mapping where a value belongs: most often a mistyped dimension keyword
            keys = ", ".join(map(str, value)) or "none"
            near = "".join(did_you_mean(str(k), FORMS) for k in value)
            sink.add(f"got a mapping (keys: {keys}); a dimension is a mapping with exactly one "
                     f"of {', '.join(FORMS)}, and a plain value must be {why}{near}", here)
        elif why:
            note = f" ({MEANING_NOTES[dotted]})" if dotted in MEANING_NOTES else ""
            sink.add(f"got {value!r}; allowed: {why}{note}", here)
        elif isinstance(rule, Fields):
            _check_fields(value, here, sink)
    return dims


def _check_fields(fields: dict, path: tuple, sink: Sink):
    for name, entry in fields.items():
        if not isinstance(entry, dict):
            sink.add(f"field {name!r} needs a mapping {{kind, role, level}}, got {entry!r}",
                     path + (name,))
            continue
        for key, rule in Fields.keys.items():
            if key not in entry:
                if key not in ("level", "at", "of"):
                    sink.add(f"field {name!r} needs {key!r} ({rule.problem(None)})", path + (name,))
            elif rule.problem(entry[key]):
                sink.add(f"got {entry[key]!r}; allowed: {rule.problem(entry[key])}",
                         path + (name, key))
        for key in entry:
            if key not in Fields.keys:
                sink.add(f"unknown key {key!r}{did_you_mean(key, Fields.keys)}; allowed: "
                         "kind, role, level, at, of", path + (name, key), key=True)
    _check_baselines(fields, path, sink)
    # Node positions are either the mesh points or the cell centroids, never both at once.
    places = [(name, e.get("at", "points")) for name, e in fields.items() if isinstance(e, dict)]
    first = places[0] if places else None
    for name, at in places:
        if at != first[1] and at in ("points", "cells"):
            sink.add(f"field {name!r} is at {at!r} but {first[0]!r} is at {first[1]!r}; rule: "
                     "every field of a study lives at the same place (points or cells)",
                     path + (name, "at"))
            break


def _check_baselines(fields: dict, path: tuple, sink: Sink):
    """A ``role: baseline`` field names the target with ``of`` and has its kind and level."""
    entries = {n: e for n, e in fields.items() if isinstance(e, dict)}
    targets = [n for n, e in entries.items() if e.get("role") == "target"]
    for name, e in entries.items():
        if e.get("role") != "baseline":
            if "of" in e:
                sink.add(f"field {name!r} has 'of' but role {e.get('role')!r}; rule: only a "
                         "field with role baseline names the field it predicts",
                         path + (name, "of"))
            continue
        of = e.get("of")
        if of not in targets:
            sink.add(f"baseline field {name!r} needs 'of' naming the target field; got {of!r}; "
                     f"allowed: {', '.join(targets) or 'no target declared'}",
                     path + (name, "of"))
            continue
        for key in ("kind", "level"):
            mine, theirs = e.get(key, "node"), entries[of].get(key, "node")
            if mine != theirs:
                sink.add(f"baseline field {name!r} is a {mine!r} {key} but its target {of!r} "
                         f"is {theirs!r}; rule: a baseline has its target's kind and level",
                         path + (name, key))


def _possible(dotted: str, dims: dict, fixed: dict) -> list | None:
    dim = dims.get(dotted)
    if dim is None:
        return [get(fixed, dotted)]
    if dim.kind == "choice":
        return list(dim.options)
    if dim.kind == "int":
        return dim.values() if dim.size() <= 4096 else dim.extremes()
    return None if dim.kind == "derived" else dim.extremes()


def order_dims(dims: dict[str, Dimension], sink: Sink) -> list[Dimension]:
    """Searched dimensions first (parents of conditions before children), then derived ones
    in dependency order; cycles become problems."""
    def depends(dim):
        deps = set(dim.only_if)
        if dim.expr is not None:
            deps |= set(dim.expr.names)
        return [d for d in deps if d in dims and d != dim.name] + \
            ([dim.name] if dim.expr is not None and dim.name in dim.expr.names else [])

    ordered, done, stack = [], set(), []

    def visit(name):
        if name in done:
            return
        if name in stack:
            cycle = stack[stack.index(name):] + [name]
            what = "derive" if dims[name].kind == "derived" else "only_if"
            sink.add(f"{what} cycle: {' -> '.join(cycle)}", tuple(name.split(".")),
                     at=tuple(name.split(".")) + (what,))
            return
        stack.append(name)
        for dep in depends(dims[name]):
            visit(dep)
        stack.pop()
        done.add(name)
        ordered.append(dims[name])

    searched = [d for d in dims.values() if d.kind != "derived"]
    for dim in searched + [d for d in dims.values() if d.kind == "derived"]:
        visit(dim.name)
    return sorted(ordered, key=lambda d: d.kind == "derived")


def check_links(dims: dict[str, Dimension], fixed: dict, leaves: list[str], sink: Sink):
    """Rules that tie keys together; ``fixed`` is the config with dimensions at defaults."""
    for dim in dims.values():
        at = tuple(dim.name.split("."))
        for key, allowed in dim.only_if.items():
            where = at + ("only_if", key)
            if key not in leaves:
                sink.add(f"only_if names {key!r}, which is not a key{did_you_mean(key, leaves)}",
                         at, at=where)
                continue
            if key in dims and dims[key].kind == "derived":
                sink.add(f"only_if may not name the derived key {key!r}", at, at=where)
                continue
            possible = _possible(key, dims, fixed)
            target = dims.get(key)
            for value in condition_values(key, allowed):
                if target is not None and target.kind in ("int", "float"):
                    bad = not target.contains(value)
                elif target is not None:
                    bad = value not in possible
                else:
                    bad = RULES[key].problem(value) is not None
                if bad:
                    shown = (f"it takes {possible!r}" if target is not None and target.kind == "choice"
                             else f"allowed: {RULES[key].problem(None) if target is None else f'[{target.lo}, {target.hi}]'}")
                    sink.add(f"only_if value {value!r} can never hold for {key}; {shown}", at,
                             at=where)
        if dim.expr is not None:
            for name in dim.expr.names:
                if name not in leaves:
                    sink.add(f"derive names {name!r}, which is not a key"
                             f"{did_you_mean(name, leaves)}", at, at=at + ("derive",))
    _check_fields_used(dims, fixed, sink)
    _check_epochs(dims, fixed, sink)


def _options(path: str, dims: dict, fixed: dict):
    """(value, where) pairs for each value a key may take."""
    dim = dims.get(path)
    at = tuple(path.split("."))
    if dim is not None and dim.kind == "choice":
        return [(v, at + ("one_of", i)) for i, v in enumerate(dim.options)]
    return [(get(fixed, path), at)]


def _check_fields_used(dims: dict, fixed: dict, sink: Sink):
    task = fixed["task"]
    if task["source"] == "demo" and task["fields"]:
        sink.add("task.fields is read for file data only; the demo has its own fields",
                 ("task", "fields"))
        return
    if task["source"] != "demo":
        roles = [f.get("role") for f in task["fields"].values() if isinstance(f, dict)]
        if roles.count("target") != 1 or "input" not in roles:
            sink.add("file data needs task.fields with exactly one target and at least one input",
                     ("task", "fields"))
            return
        if any(not isinstance(f, dict) or f.get("kind") not in FIELD_KINDS
               for f in task["fields"].values()):
            return
    fields = task_fields(task)
    inputs = [n for n, f in fields.items() if f["role"] == "input"]
    vectors = [n for n in inputs if fields[n]["kind"] == "vector"]
    for value, at in _options("model.node_inputs", dims, fixed):
        extra = [v for v in value if v not in inputs]
        if extra:
            sink.add(f"node_inputs {value!r} is not a subset of the input fields; unknown "
                     f"{extra!r}; inputs: {', '.join(inputs)}", ("model", "node_inputs"), at=at)
    for value, at in _options("model.node_attr_field", dims, fixed):
        if value not in vectors:
            sink.add(f"node_attr_field {value!r} must be a vector input field: "
                     f"{', '.join(vectors) or '(none)'}{did_you_mean(value, vectors)}",
                     ("model", "node_attr_field"), at=at)
    for value, at in _options("model.edge_attrs.extra_vector", dims, fixed):
        if value and value not in vectors:
            sink.add(f"extra_vector {value!r} must be \"\" or a vector input field: "
                     f"{', '.join(vectors) or '(none)'}", ("model", "edge_attrs", "extra_vector"),
                     at=at)
    needs = {"speed_jump": "velocity", "radial_velocity": "velocity", "pressure_jump": "pressure"}
    for value, at in _options("model.edge_invariants", dims, fixed):
        for name in value:
            if name in needs and needs[name] not in inputs:
                sink.add(f"edge invariant {name!r} needs an input field {needs[name]!r}; "
                         f"inputs: {', '.join(inputs)}", ("model", "edge_invariants"), at=at)
    if task["source"] == "demo":
        left = set(task["demo"]["families"]) - set(task["split"]["hold_out"])
        if not set(task["split"]["hold_out"]) <= set(task["demo"]["families"]) or not left:
            sink.add(f"hold_out {task['split']['hold_out']!r} must be a subset of "
                     f"task.demo.families that leaves at least one family",
                     ("task", "split", "hold_out"))


# Pruners that read search.pruner.min_epochs and max_epochs (searcher.search._registry).
EPOCH_BUDGET_PRUNERS = ("hyperband", "outlook")


def _check_epochs(dims: dict, fixed: dict, sink: Sink):
    epochs = _possible("training.epochs", dims, fixed)
    if epochs is None:
        return
    pruner = fixed["search"]["pruner"]
    budgeted = pruner["kind"] in EPOCH_BUDGET_PRUNERS   # the others read no epoch budget
    if budgeted and pruner["max_epochs"] > min(epochs):
        sink.add(f"max_epochs {pruner['max_epochs']} exceeds training.epochs "
                 f"({min(epochs)} at the least); the pruner budget must fit in a run",
                 ("search", "pruner", "max_epochs"))
    if budgeted and pruner["min_epochs"] > pruner["max_epochs"]:
        sink.add(f"min_epochs {pruner['min_epochs']} exceeds max_epochs {pruner['max_epochs']}",
                 ("search", "pruner", "min_epochs"))
    elif pruner["kind"] == "outlook" and pruner["min_epochs"] == pruner["max_epochs"]:
        # outlook compares a curve's start with its end, so it needs a window of 2 epochs
        sink.add(f"min_epochs {pruner['min_epochs']} must be below max_epochs "
                 f"{pruner['max_epochs']} for the outlook pruner", ("search", "pruner", "min_epochs"))
    warmup = _possible("training.warmup_epochs", dims, fixed)
    if warmup is not None and max(warmup) >= min(epochs):
        sink.add(f"warmup_epochs {max(warmup)} must be below training.epochs ({min(epochs)})",
                 ("training", "warmup_epochs"))
