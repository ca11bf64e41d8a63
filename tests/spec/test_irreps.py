"""Irreps parsing, field kinds, hidden composition and reachability, checked against e3nn
(0.6) as the reference library; the spec layer itself never imports e3nn."""
from __future__ import annotations

import pytest
from e3nn import io, o3

from searcher.spec import FIELD_KINDS, hidden_irreps, parse_irreps, reachable_irreps, task_fields


@pytest.mark.parametrize("text", ["16x0e+8x1o", "0e", "3x2e + 1x0o + 4x1e", "2x8o"])
def test_parse_matches_e3nn(text):
    # reference: e3nn o3.Irreps parses the same notation into (mul, (l, p))
    ours = [(m, l, p) for m, l, p in parse_irreps(text)]
    theirs = [(mul, ir.l, ir.p) for mul, ir in o3.Irreps(text)]
    assert ours == theirs


@pytest.mark.parametrize("text, phrase", [
    ("8x0y", "not of the form"), ("0x0e", "at least 1"), ("1x9e", "at most 8"),
    ("8x0e++1o", "not of the form"), ("", "non-empty"), ("x1o", "not of the form")])
def test_parse_refuses(text, phrase):
    with pytest.raises(ValueError, match=phrase):
        parse_irreps(text)


def test_field_kinds_match_cartesian_tensors():
    # reference: e3nn io.CartesianTensor decomposes 3x3 tensors ("ij=ji" symmetric: 0e+2e)
    assert o3.Irreps(FIELD_KINDS["symmetric_tensor"]) == io.CartesianTensor("ij=ji")
    assert o3.Irreps(FIELD_KINDS["tensor"]).simplify() == io.CartesianTensor("ij").sort().irreps.simplify()
    assert o3.Irreps(FIELD_KINDS["vector"]).dim == 3 and FIELD_KINDS["axial_vector"] == "1e"
    # common practice: a traceless symmetric 3x3 tensor has 5 components (l = 2)
    assert o3.Irreps(FIELD_KINDS["traceless_symmetric_tensor"]).dim == 5


def test_demo_fields():
    fields = task_fields({"source": "demo", "fields": {}})
    # b = <uu>/(2k) - I/3 is traceless by construction (definition in ../shared/REFERENCES.md), so only 2e remains.
    assert fields["anisotropy"] == {"kind": "traceless_symmetric_tensor", "irreps": "2e",
                                    "role": "target", "level": "node"}
    assert [n for n, f in fields.items() if f["role"] == "input"] == \
        ["velocity", "pressure", "pressure_gradient", "strain_rate", "vorticity",
         "scaled_strain", "scaled_vorticity"]
    # vorticity is a curl: an axial vector, even under inversion (1e) - common practice
    assert fields["vorticity"]["irreps"] == "1e"
    file_fields = task_fields({"source": "x.npz", "fields": {"w": {"kind": "axial_vector",
                                                                   "role": "input"}}})
    assert file_fields == {"w": {"kind": "axial_vector", "irreps": "1e", "role": "input",
                                 "level": "node"}}


@pytest.mark.parametrize("cfg, width, expected", [
    ({"lmax": 2, "multiplicity": 8, "taper": "uniform", "parity": "natural"}, 32, "8x0e+8x1o+8x2e"),
    ({"lmax": 2, "multiplicity": 8, "taper": "tapered", "parity": "both"}, 32,
     "8x0e+8x0o+4x1e+4x1o+2x2e+2x2o"),
    ({"lmax": 3, "multiplicity": 4, "taper": "tapered", "parity": "natural"}, 32, "4x0e+2x1o+1x2e+1x3o"),
    # balanced: round(32 / (2l+1)) copies = 32, 11, 6 (about 32 components per order)
    ({"lmax": 2, "multiplicity": 8, "taper": "balanced", "parity": "natural"}, 32, "32x0e+11x1o+6x2e"),
])
def test_hidden_irreps(cfg, width, expected):
    assert hidden_irreps({"irreps": "", **cfg}, width) == expected
    # natural parity follows spherical harmonics: e3nn's Irreps.spherical_harmonics(lmax)
    if cfg["parity"] == "natural":
        orders = [ir for _, ir in o3.Irreps(expected)]
        assert orders == [ir for _, ir in o3.Irreps.spherical_harmonics(cfg["lmax"])]


def test_given_irreps_win():
    assert hidden_irreps({"irreps": "4x0e + 2x1e", "lmax": 3, "multiplicity": 9,
                          "taper": "uniform", "parity": "both"}, 8) == "4x0e+2x1e"


@pytest.mark.parametrize("hidden, sh_lmax", [
    ("8x0e+8x1o", 1), ("4x0e", 2), ("4x0e+2x1o+1x2e", 2), ("2x0e+2x0o", 1), ("3x0e+1x1o", 0)])
def test_reachability_matches_e3nn_tensor_products(hidden, sh_lmax):
    # reference: e3nn o3.FullTensorProduct lists every output irrep of a tensor product
    # (Clebsch-Gordan selection rule |l1-l2| <= l <= l1+l2, parities multiply)
    h = o3.Irreps(hidden)
    outs = {(ir.l, ir.p) for _, ir in h}
    outs |= {(ir.l, ir.p) for _, ir in
             o3.FullTensorProduct(h, o3.Irreps.spherical_harmonics(sh_lmax)).irreps_out}
    assert reachable_irreps(hidden, sh_lmax) == outs


def test_pseudoscalars_need_both_parities():
    # memory: products of natural-parity irreps always have parity (-1)^(l1+l2); l = 0
    # requires l1 = l2, so 0o never appears without an odd-parity ingredient
    natural = hidden_irreps({"irreps": "", "lmax": 2, "multiplicity": 2, "taper": "uniform",
                             "parity": "natural"}, 8)
    assert (0, -1) not in reachable_irreps(natural, 2)
    both = hidden_irreps({"irreps": "", "lmax": 2, "multiplicity": 2, "taper": "uniform",
                          "parity": "both"}, 8)
    assert (0, -1) in reachable_irreps(both, 2)
