"""The fused gate against e3nn's ``nn.Gate`` (the reference library), outputs and gradients."""
from __future__ import annotations

import copy

import pytest
import torch
from e3nn import nn as enn
from e3nn import o3

from searcher.models import build_model, default_dtype, random_graph
from searcher.models._fused_gate import FusedGate, fuse_gate
from searcher.models._irreps import make_gate
from searcher.testing import make_fields
from tests.models.test_fused import small_config

FIELDS = make_fields()

CASES = [
    "16x0e+8x1o+8x2e",            # the hidden irreps of both families: no permutation
    "8x0e+4x0o+8x1o+8x2e+4x1e",   # odd scalars (tanh) and gated blocks out of sorted order
    "2x0o+3x1e+1x3o+2x0e",
    "4x0e",                       # scalars only: no gates
    "8x1o+4x2e",                  # gated only: no activated scalars
]


def _pair(irreps: str, act: str = "silu"):
    gate = make_gate(o3.Irreps(irreps), act)
    fused = copy.deepcopy(gate)
    assert fuse_gate(fused) and type(fused) is FusedGate
    return gate, fused


@pytest.mark.parametrize("irreps", CASES)
@pytest.mark.parametrize("act", ["silu", "tanh"])
def test_fused_gate_matches_e3nn_gate_in_float64(irreps, act):
    gate, fused = _pair(irreps, act)
    gen = torch.Generator().manual_seed(3)
    x = torch.randn(2, 7, gate.irreps_in.dim, dtype=torch.float64, generator=gen,
                    requires_grad=True)  # two leading dimensions, as e3nn accepts
    want, got = gate(x), fused(x)
    assert got.shape == want.shape
    torch.testing.assert_close(got, want, rtol=0, atol=1e-12)
    grad_out = torch.randn(want.shape, dtype=torch.float64, generator=gen)
    (a,) = torch.autograd.grad(want, x, grad_out)
    (b,) = torch.autograd.grad(got, x, grad_out)
    torch.testing.assert_close(b, a, rtol=0, atol=1e-12)


def test_out_of_order_blocks_take_the_permutation():
    # e3nn sorts the gate's input (odd scalars first, then 1e before 2e ...): the fused plan
    # must carry the column permutation there, and none for the families' hidden irreps.
    _, plain = _pair("16x0e+8x1o+8x2e")
    _, mixed = _pair("8x0e+4x0o+8x1o+8x2e+4x1e")
    assert plain._fused_gate["perm"] is None
    assert mixed._fused_gate["perm"] is not None


def test_float32_agrees_with_float64():
    gate, fused = _pair("8x0e+4x0o+8x1o+8x2e+4x1e")
    x = torch.randn(9, gate.irreps_in.dim, dtype=torch.float64)
    ref = gate.to(torch.float64)(x)
    out = fused.float()(x.float())
    assert out.dtype == torch.float32
    torch.testing.assert_close(out.double(), ref, rtol=1e-5, atol=1e-6)


@pytest.mark.parametrize("family", ["steerable", "gated"])
def test_fused_builds_switch_every_gate_and_keep_e3nn_state(family):
    cfg = small_config(family)
    torch.manual_seed(0)
    with default_dtype(torch.float64):
        fused = build_model(cfg, FIELDS, "anisotropy")
        plain = build_model(cfg, FIELDS, "anisotropy", kernels="e3nn")
    graph = random_graph(FIELDS, 10, seed=4, dtype=torch.float64)
    gates = [m for m in fused.modules() if isinstance(m, enn.Gate)]
    assert gates and all(type(m) is FusedGate for m in gates)
    assert not any(type(m) is FusedGate for m in plain.modules())
    assert fused.state_dict().keys() == plain.state_dict().keys()
    plain.load_state_dict(fused.state_dict())
    torch.testing.assert_close(fused(graph), plain(graph), rtol=0, atol=1e-12)
