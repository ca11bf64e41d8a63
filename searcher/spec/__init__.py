"""The study language: safe YAML with positions, ``extends``, validation, search space.

Public API (see DEVELOPERS.md, "Contracts between layers"): :func:`load_study`,
:class:`Study`, :class:`Dimension`, :func:`config_hash`, :data:`FIELD_KINDS`,
:func:`task_fields`, :func:`hidden_irreps`, :func:`parse_irreps`, :func:`json_schema`,
:data:`STRESS_SETS` (the stress-set names ``task.split.stress`` accepts).
"""
from searcher.spec._checks import flatten
from searcher.spec._dims import Dimension
from searcher.spec._irreps import (DEMO_FIELDS, FIELD_KINDS, format_irreps, hidden_irreps,
                                   parse_irreps, reachable_irreps, task_fields)
from searcher.spec._rules import FIELD_ROLES, STRESS_SETS
from searcher.spec._schema import json_schema
from searcher.spec._study import Study, config_hash, defaults, load_study

__all__ = ["load_study", "Study", "Dimension", "config_hash", "defaults", "FIELD_KINDS",
           "DEMO_FIELDS", "task_fields", "hidden_irreps", "parse_irreps", "format_irreps",
           "reachable_irreps", "json_schema", "flatten", "FIELD_ROLES", "STRESS_SETS"]
