"""The study language accepts exactly the names the registries implement."""
from __future__ import annotations

import pytest

from searcher.models import ACTIVATIONS, ENVELOPES, FAMILIES, RADIAL_BASES, Registry
from searcher.options import REGISTERED
from searcher.search import PRUNERS, SAMPLERS
from searcher.spec._rules import RULES

IMPLEMENTED = {"model.family": FAMILIES.names(), "model.radial.basis": RADIAL_BASES.names(),
               "model.radial.envelope": ENVELOPES.names(),
               "model.activation": ACTIVATIONS.names(),
               "search.sampler.kind": list(SAMPLERS), "search.pruner.kind": list(PRUNERS)}


@pytest.mark.parametrize("key", sorted(IMPLEMENTED))
def test_every_registry_name_is_accepted_and_nothing_else(key):
    rule = RULES[key]
    assert set(IMPLEMENTED[key]) == set(REGISTERED[key])
    for name in IMPLEMENTED[key]:
        assert rule.problem(name) is None
    assert rule.problem("not-a-registered-name") is not None
    assert set(rule.schema()["enum"]) == set(IMPLEMENTED[key])


def test_a_registry_refuses_an_undeclared_name():
    with pytest.raises(ValueError, match="searcher/options.py"):
        Registry("activation", "model.activation").register("swish")
