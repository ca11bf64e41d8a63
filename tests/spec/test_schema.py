"""The JSON Schema of the language accepts every shipped study and base."""
from __future__ import annotations

from pathlib import Path

import jsonschema
import pytest

from searcher.spec import defaults, json_schema
from searcher.spec._yaml import read_yaml

ROOT = Path(__file__).resolve().parents[2]
FILES = sorted((ROOT / "studies").glob("*.yaml")) + sorted((ROOT / "configs").glob("*.yaml"))


@pytest.fixture(scope="module")
def validator():
    schema = json_schema()
    # reference: jsonschema's meta-schema check for draft 2020-12
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


@pytest.mark.parametrize("path", FILES, ids=lambda p: p.name)
def test_shipped_files_are_valid(validator, path):
    assert list(validator.iter_errors(read_yaml(path).data)) == []


def test_defaults_are_valid(validator):
    assert list(validator.iter_errors(defaults())) == []


@pytest.mark.parametrize("doc", [
    {"model": {"layres": 2}},
    {"search": {"workers": {"whole": [1, 4]}}},
    {"model": {"layers": {"whole": [1, 4], "stride": 2}}},
    {"model": {"family": "transformer"}},
    {"study": {"name": "../x"}},
    {"training": {"learning_rate": {"real": [0.1]}}},
])
def test_schema_refuses(validator, doc):
    assert list(validator.iter_errors(doc))


def test_dimension_forms_allowed_where_dimensions_are(validator):
    doc = {"extends": ["../configs/flows-base.yaml"],
           "model": {"layers": {"whole": [1, 3], "only_if": {"model.family": "gated"}},
                     "radial": {"cutoff": {"derive": "task.graph.radius"}}},
           "training": {"learning_rate": {"real": [1e-4, 1e-2], "log": True}}}
    assert list(validator.iter_errors(doc)) == []
