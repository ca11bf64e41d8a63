"""Fused tensor-product kernels against e3nn's own generated code (the reference library)."""
from __future__ import annotations

import copy
import pickle

import pytest
import torch
from e3nn import o3
from hypothesis import given, settings
from hypothesis import strategies as st

from searcher.models import build_model, default_dtype, random_graph
from searcher.models._gate import exact_float64
from searcher.models._fused import FusedLinear, FusedProduct, fuse_products, fusable
from searcher.testing import make_fields, model_config

FIELDS = make_fields()


def small_config(family: str) -> dict:
    """Two layers at lmax 2, multiplicity 2: every kind of fused module, in a few ms."""
    return model_config({"family": family, "hidden.multiplicity": 2, "hidden.lmax": 2,
                         "layers": 2, "radial.count": 4, "width": 6})


def _uvu(hidden: str, lmax: int, shared: bool) -> o3.TensorProduct:
    """A NequIP-style depthwise product (one output block per path), as the gated family."""
    hidden, sh = o3.Irreps(hidden), o3.Irreps.spherical_harmonics(lmax)
    mid, ins = [], []
    for i, (mul, a) in enumerate(hidden):
        for j, (_, b) in enumerate(sh):
            for c in a * b:
                ins.append((i, j, len(mid), "uvu", True))
                mid.append((mul, c))
    return o3.TensorProduct(hidden, sh, o3.Irreps(mid), ins, shared_weights=shared,
                            internal_weights=shared)


CASES = {
    # the steerable family's message product: concatenated features x SH(2) -> gate input
    "fully connected, message": lambda: o3.FullyConnectedTensorProduct(
        "3x0e+3x1o+3x2e+3x0e+3x1o+3x2e+2x0e", "1x0e+1x1o+1x2e", "9x0e+3x1o+3x2e"),
    "fully connected, mul2 > 1, both parities": lambda: o3.FullyConnectedTensorProduct(
        "2x0e+3x1o+1x1e", "2x0e+2x1o", "3x0e+2x1o+1x2e+1x1e+1x0o"),
    "fully connected, scalar attribute, unreachable output": lambda:
        o3.FullyConnectedTensorProduct("2x0e+3x1o", "1x0e", "3x0e+2x1o+2x2e"),
    "fully connected, weights per sample": lambda: o3.FullyConnectedTensorProduct(
        "2x0e+2x1o", "1x0e+1x1o", "2x0e+2x1o", shared_weights=False),
    "depthwise, weights per edge": lambda: _uvu("3x0e+3x1o+3x2e", 2, False),
    "depthwise, shared, lmax 3": lambda: _uvu("2x0e+2x1o+2x2e+2x3o", 3, True),
    "depthwise into shared outputs, mul2 > 1": lambda: o3.TensorProduct(
        "3x0e+3x1o", "2x0e+1x1o", "3x0e+3x1o",
        [(0, 0, 0, "uvu", True), (1, 0, 1, "uvu", True), (1, 1, 0, "uvu", True),
         (0, 1, 1, "uvu", True)], shared_weights=False, internal_weights=False),
    "uvw and uvu into one block": lambda: o3.TensorProduct(
        "3x0e+3x1o", "2x0e+1x1o", "3x0e+3x1o",
        [(0, 0, 0, "uvu", True), (1, 0, 1, "uvw", True), (1, 1, 0, "uvu", True)]),
}


def _compare(tp: o3.TensorProduct, batch: int = 5, seed: int = 0):
    """Outputs and gradients (inputs and weights) of e3nn's code and of the fused kernel."""
    gen = torch.Generator().manual_seed(seed)
    x1 = torch.randn(batch, tp.irreps_in1.dim, generator=gen, dtype=torch.float64)
    x2 = torch.randn(batch, tp.irreps_in2.dim, generator=gen, dtype=torch.float64)
    w = None if tp.internal_weights else torch.randn(batch, tp.weight_numel, generator=gen,
                                                     dtype=torch.float64)
    results = []
    for module in (tp, _fused_copy(tp)):
        a, b = x1.clone().requires_grad_(), x2.clone().requires_grad_()
        extra = () if w is None else (w.clone().requires_grad_(),)
        out = module(a, b, *extra)
        weights = list(module.parameters()) + list(extra)
        grads = torch.autograd.grad((out * torch.cos(out)).sum(), [a, b, *weights])
        results.append((out, grads))
    return results


def _fused_copy(tp):
    fused = copy.deepcopy(tp)
    assert fuse_products(fused) == 1
    return fused


@pytest.mark.parametrize("name", list(CASES))
def test_fused_matches_e3nn_outputs_and_gradients(name):
    # Reference: e3nn 0.6's generated tensor-product code on the same weights, in float64.
    # Built in float64, so e3nn's own Wigner 3j buffers are exact too.
    torch.manual_seed(1)
    with default_dtype(torch.float64):
        tp = CASES[name]()
    (ref, ref_grads), (out, grads) = _compare(tp)
    assert out.shape == ref.shape
    torch.testing.assert_close(out, ref, rtol=0, atol=1e-12)
    for g, rg in zip(grads, ref_grads):
        torch.testing.assert_close(g, rg, rtol=0, atol=1e-12)


@settings(max_examples=12, deadline=None)
@given(muls=st.lists(st.integers(1, 3), min_size=2, max_size=4), l2max=st.integers(0, 2),
       outs=st.lists(st.integers(0, 3), min_size=3, max_size=3))
def test_fused_matches_e3nn_on_random_structures(muls, l2max, outs):
    # Reference: e3nn's FullyConnectedTensorProduct on random irreps of both parities.
    irreps = [(m, (l, (-1) ** (l + k))) for k, m in enumerate(muls) for l in [k % 3]]
    in1 = o3.Irreps(irreps)
    in2 = o3.Irreps.spherical_harmonics(l2max)
    out = o3.Irreps([(m, (l, p)) for l, m in enumerate(outs) for p in (1, -1) if m])
    torch.manual_seed(0)
    with default_dtype(torch.float64):
        tp = o3.FullyConnectedTensorProduct(in1, in2, out)
    if not fusable(tp):  # no path reaches the outputs: nothing to compare
        return
    (ref, ref_grads), (got, grads) = _compare(tp, batch=3)
    torch.testing.assert_close(got, ref, rtol=0, atol=1e-12)
    for g, rg in zip(grads, ref_grads):
        torch.testing.assert_close(g, rg, rtol=0, atol=1e-12)


@pytest.mark.parametrize("irreps_in, irreps_out", [
    ("3x0e+3x1o+3x2e", "3x0e+3x1o+3x2e"),            # the gated family's mixer
    ("3x0e+2x1o+2x1o+1x2e", "4x0e+6x0e+3x1o"),       # repeated blocks, gate input
    ("2x0e", "3x0e+2x1o"),                           # an output no path reaches
])
def test_fused_linear_matches_e3nn(irreps_in, irreps_out):
    # Reference: e3nn 0.6's o3.Linear (its generated einsum code) on the same weights.
    torch.manual_seed(2)
    with default_dtype(torch.float64):
        lin = o3.Linear(irreps_in, irreps_out)
    fused = copy.deepcopy(lin)
    assert fuse_products(fused) == 1 and type(fused) is FusedLinear
    x = torch.randn(6, lin.irreps_in.dim, dtype=torch.float64)
    results = []
    for module in (lin, fused):
        a = x.clone().requires_grad_()
        out = module(a)
        results.append((out, torch.autograd.grad(out.pow(3).sum(), [a, module.weight])))
    (ref, ref_grads), (got, grads) = results
    torch.testing.assert_close(got, ref, rtol=0, atol=1e-12)
    for g, rg in zip(grads, ref_grads):
        torch.testing.assert_close(g, rg, rtol=0, atol=1e-12)


def test_linears_with_biases_keep_e3nn_code():
    lin = o3.Linear("2x0e+1x1o", "2x0e+1x1o", biases=True)
    assert fuse_products(lin) == 0 and type(lin) is o3.Linear


def test_unsupported_products_keep_e3nn_code():
    # The gates' element-wise product ('uuu') and weightless paths stay on e3nn's code.
    elementwise = o3.ElementwiseTensorProduct("2x1o", "2x0e")
    weightless = o3.TensorProduct("2x1o", "1x0e", "2x1o", [(0, 0, 0, "uvu", False)])
    assert not fusable(elementwise) and not fusable(weightless)
    holder = torch.nn.ModuleList([elementwise, weightless])
    assert fuse_products(holder) == 0
    assert type(elementwise) is o3.ElementwiseTensorProduct


@pytest.mark.parametrize("family", ["steerable", "gated"])
def test_fused_model_equals_plain_e3nn_model(family):
    # Reference: the same architecture built on e3nn's code, loaded with the same state dict.
    cfg = small_config(family)
    torch.manual_seed(0)
    fused = build_model(cfg, FIELDS, "anisotropy")
    plain = build_model(cfg, FIELDS, "anisotropy", kernels="e3nn")
    assert any(fusable(m) for m in plain.modules())
    assert not any(fusable(m) for m in fused.modules())  # every candidate was switched
    assert fused.state_dict().keys() == plain.state_dict().keys()
    plain.load_state_dict(fused.state_dict())
    graph = random_graph(FIELDS, 10, seed=4)
    # float32 on both sides: the same sums in another order (float32 rounding apart).
    torch.testing.assert_close(fused(graph), plain(graph), rtol=1e-4, atol=1e-6)


def test_float64_conversion_uses_exact_coupling_constants():
    # A fused product built in float32 and converted to float64 evaluates with the float64
    # Wigner 3j symbols of e3nn.o3.wigner_3j (reference library), not float32-rounded ones:
    # it matches a product built in float64 to float64 rounding.
    torch.manual_seed(0)
    tp32 = o3.FullyConnectedTensorProduct("2x1o+2x2e", "1x0e+1x1o+1x2e", "2x0e+2x1o+2x2e")
    fuse_products(tp32)
    with torch.no_grad():
        tp32.weight.copy_(tp32.weight.to(torch.bfloat16).float())  # exact in float32
    tp64 = copy.deepcopy(tp32).to(torch.float64)
    x1 = torch.randn(4, tp32.irreps_in1.dim, dtype=torch.float64)
    x2 = torch.randn(4, tp32.irreps_in2.dim, dtype=torch.float64)
    exact = FusedProduct(tp32)(x1, x2, tp32.weight.detach().double())
    torch.testing.assert_close(tp64(x1, x2), exact, rtol=0, atol=1e-13)
    assert tp32(x1.float(), x2.float()).dtype == torch.float32


def test_fused_models_copy_and_pickle():
    # Trainers deep-copy best states and the dossier pickles models: both round trips keep
    # the fused class and compute the same function.
    cfg = model_config({"family": "gated", "hidden.multiplicity": 2, "hidden.lmax": 1,
                        "layers": 1, "radial.count": 4, "width": 6})
    torch.manual_seed(0)
    model = build_model(cfg, FIELDS, "anisotropy")
    graph = random_graph(FIELDS, 8, seed=2)
    ref = model(graph)
    for other in (copy.deepcopy(model), pickle.loads(pickle.dumps(model))):
        assert torch.equal(other(graph), ref)
        kinds = [type(m).__name__ for m in other.modules() if "Fused" in type(m).__name__]
        assert kinds == [type(m).__name__ for m in model.modules()
                         if "Fused" in type(m).__name__] and kinds


def test_products_built_for_the_fused_kernel_carry_no_e3nn_code():
    # A fused build skips e3nn's code generation for the products it switches; their
    # stand-in (with e3nn's buffers, so state dicts match) refuses to run, also after a
    # pickle round trip, instead of computing anything.
    cfg = model_config({"family": "steerable", "hidden.multiplicity": 2, "hidden.lmax": 1,
                        "layers": 1, "radial.count": 4, "width": 6})
    model = build_model(cfg, FIELDS, "anisotropy")
    tp = next(m for m in model.modules() if hasattr(m, "_fused"))
    stand_in = tp._compiled_main_left_right
    x1, x2 = torch.randn(3, tp.irreps_in1.dim), torch.randn(3, tp.irreps_in2.dim)
    for module in (stand_in, pickle.loads(pickle.dumps(stand_in))):
        with pytest.raises(RuntimeError, match="fused kernel"):
            module(x1, x2, tp.weight)
    assert tp(x1, x2).shape == (3, tp.irreps_out.dim)


@pytest.mark.parametrize("family", ["steerable", "gated"])
def test_fused_model_run_in_float32_then_converted_stays_exact(family):
    # The trial's order of events: a model runs in float32 (its kernels keep float32 casts of
    # their constants), then the equivariance gate converts it to float64.  The float64
    # evaluation must use the float64 originals: equal to e3nn's code in float64 to 1e-12.
    cfg = small_config(family)
    torch.manual_seed(1)
    fused = build_model(cfg, FIELDS, "anisotropy")
    assert any(isinstance(m, FusedLinear) for m in fused.modules())
    fused(random_graph(FIELDS, 10, seed=5))  # float32 casts made and kept
    with default_dtype(torch.float64):
        plain = build_model(cfg, FIELDS, "anisotropy", kernels="e3nn")
    graph = random_graph(FIELDS, 10, seed=5, dtype=torch.float64)
    with exact_float64(fused):  # the gate's conversion (e3nn's 3j buffers rebuilt exactly)
        plain.load_state_dict(fused.state_dict())
        torch.testing.assert_close(fused(graph), plain(graph), rtol=0, atol=1e-12)
