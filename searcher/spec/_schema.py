"""JSON Schema (draft 2020-12) of the study language, generated from the declared rules.

Nothing is required (studies and bases override any subset of keys); under ``model`` and
``training`` every single key may also be written as a dimension.
"""
from __future__ import annotations

from searcher.spec._rules import RULES, VARYING_SECTIONS, Whole, Real

__all__ = ["json_schema"]

_ONLY_IF = {"type": "object", "minProperties": 1,
            "propertyNames": {"pattern": r"^[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z_][A-Za-z0-9_]*)+$"}}


def _dimensions(rule) -> list[dict]:
    def form(key, value, **extra):
        return {"type": "object", "required": [key], "additionalProperties": False,
                "properties": {key: value, "only_if": _ONLY_IF, **extra}}
    out = [form("one_of", {"type": "array", "minItems": 1, "items": rule.schema()})]
    if isinstance(rule, (Whole, Real)):
        out.append(form("derive", {"type": "string", "minLength": 1}))
    if isinstance(rule, Whole):
        pair = {"type": "array", "items": {"type": "integer"}, "minItems": 2, "maxItems": 2}
        out.append(form("whole", pair, step={"type": "integer", "minimum": 1},
                        log={"type": "boolean"}))
    if isinstance(rule, Real):
        pair = {"type": "array", "items": {"type": "number"}, "minItems": 2, "maxItems": 2}
        out.append(form("real", pair, log={"type": "boolean"}))
    return out


def _section(tree: dict, path: tuple) -> dict:
    props = {}
    for key, value in tree.items():
        dotted = ".".join(path + (key,))
        if dotted in RULES:
            plain = RULES[dotted].schema()
            props[key] = {"anyOf": [plain] + _dimensions(RULES[dotted])} \
                if path[0] in VARYING_SECTIONS else plain
        else:
            props[key] = _section(value, path + (key,))
    return {"type": "object", "properties": props, "additionalProperties": False}


def json_schema() -> dict:
    """The schema as a plain dict (``searcher schema`` prints it)."""
    from searcher.spec._study import defaults

    props = {name: _section(section, (name,)) for name, section in defaults().items()}
    props["extends"] = {"anyOf": [{"type": "string", "minLength": 1},
                                  {"type": "array", "items": {"type": "string", "minLength": 1}}]}
    return {"$schema": "https://json-schema.org/draft/2020-12/schema",
            "$id": "https://searcher.invalid/study.schema.json",
            "title": "searcher study", "description": "A study file or a shared base it extends.",
            "type": "object", "properties": props, "additionalProperties": False}
