"""The compiled tensor-product kernel and its PyTorch fallback, against e3nn's generated code."""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import textwrap

import pytest
import torch
from e3nn import o3

from searcher.models import default_dtype
from searcher.models._compiled import child_env, kernel_module, kernel_status, pytorch_kernels
from tests.models.test_fused import CASES, _compare, _uvu

HAS_COMPILER = shutil.which(os.environ.get("CXX") or "c++") is not None

EXTRA = {
    # lmax 1 and 3 of both families' products, with parity-odd inputs and outputs
    "fully connected, lmax 1, odd paths": lambda: o3.FullyConnectedTensorProduct(
        "2x0e+2x1o+1x0o+1x1e", "1x0e+1x1o", "2x0e+2x1o+1x1e+1x0o"),
    "fully connected, lmax 3": lambda: o3.FullyConnectedTensorProduct(
        "2x0e+2x1o+2x2e+2x3o", "1x0e+1x1o+1x2e+1x3o", "3x0e+2x1o+2x2e+2x3o+1x3e"),
    "depthwise, weights per edge, lmax 3": lambda: _uvu("2x0e+2x1o+2x2e+2x3o", 3, False),
    "depthwise, weights per edge, lmax 1": lambda: _uvu("3x0e+3x1o", 1, False),
}


def test_compiler_present_means_the_compiled_kernel_runs():
    # Every machine of this kind (CI included) has g++; the kernel must then build and load.
    if not HAS_COMPILER:
        pytest.skip("no C++ compiler here: the fallback test below covers this machine")
    assert kernel_status() == "compiled"
    assert kernel_module() is not None


@pytest.mark.parametrize("path", ["compiled", "pytorch"])
@pytest.mark.parametrize("name", list(CASES) + list(EXTRA))
def test_both_paths_match_e3nn_to_1e12(name, path):
    # Reference: e3nn 0.6's generated code on the same weights, float64, outputs and the
    # gradients of inputs and weights (shared and per-edge).
    if path == "compiled" and kernel_module() is None:
        pytest.skip(f"compiled kernel unavailable: {kernel_status()}")
    torch.manual_seed(3)
    with default_dtype(torch.float64):
        tp = {**CASES, **EXTRA}[name]()
    if path == "pytorch":
        with pytorch_kernels():
            (ref, ref_grads), (out, grads) = _compare(tp, batch=7)
    else:
        (ref, ref_grads), (out, grads) = _compare(tp, batch=7)
    torch.testing.assert_close(out, ref, rtol=0, atol=1e-12)
    for g, rg in zip(grads, ref_grads):
        torch.testing.assert_close(g, rg, rtol=0, atol=1e-12)


def test_compiled_float32_agrees_with_float64():
    # float32 rounding only: the same tables cast per dtype (derived bound ~1e-5 relative).
    if kernel_module() is None:
        pytest.skip(f"compiled kernel unavailable: {kernel_status()}")
    torch.manual_seed(0)
    tp = o3.FullyConnectedTensorProduct("4x0e+4x1o+4x2e", "1x0e+1x1o+1x2e", "4x0e+4x1o+4x2e")
    from searcher.models._fused import fuse_products
    fuse_products(tp)
    x1, x2 = torch.randn(300, tp.irreps_in1.dim), torch.randn(300, tp.irreps_in2.dim)
    got = tp(x1, x2)
    exact = tp.to(torch.float64)(x1.double(), x2.double())
    torch.testing.assert_close(got.double(), exact, rtol=1e-4, atol=1e-5)


_CHILD = textwrap.dedent("""
    import json, sys, torch
    from searcher.models import build_model, default_dtype, random_graph
    from searcher.models._compiled import kernel_status
    from searcher.testing import make_fields, model_config
    fields = make_fields()
    out = {}
    for family in ("steerable", "gated"):
        cfg = model_config({"family": family, "hidden.multiplicity": 2, "hidden.lmax": 2,
                            "layers": 1, "radial.count": 4, "width": 6})
        torch.manual_seed(0)
        with default_dtype(torch.float64):  # e3nn's own constants exact too
            fused = build_model(cfg, fields, "anisotropy")
            plain = build_model(cfg, fields, "anisotropy", kernels="e3nn")
        plain.load_state_dict(fused.state_dict())
        g = random_graph(fields, 10, seed=1, dtype=torch.float64)
        a, b = fused(g), plain(g)
        ga = torch.autograd.grad(a.square().sum(), list(fused.parameters()))
        gb = torch.autograd.grad(b.square().sum(), list(plain.parameters()))
        out[family] = max([(a - b).abs().max().item()]
                          + [(x - y).abs().max().item() for x, y in zip(ga, gb) if x.numel()])
    print(json.dumps({"status": kernel_status(), "diff": out}))
""")


def _child(tmp_path, **env_changes):
    env = child_env(SEARCHER_KERNEL_CACHE=str(tmp_path / "kernels"), **env_changes)
    proc = subprocess.run([sys.executable, "-c", _CHILD], capture_output=True, text=True,
                          env=env, cwd=tmp_path, timeout=600)
    assert proc.returncode == 0, proc.stderr[-3000:]
    return json.loads(proc.stdout.strip().splitlines()[-1]), proc.stderr


def test_hidden_compiler_falls_back_with_one_line(tmp_path):
    # A PATH with python but no C++ compiler and an empty build cache: the PyTorch path runs,
    # one stderr line says why, and both families still equal e3nn's code to 1e-12 (float64).
    bare = tmp_path / "bin"
    bare.mkdir()
    (bare / "python").symlink_to(sys.executable)
    result, err = _child(tmp_path, PATH=str(bare), CXX="c++")
    assert result["status"].startswith("no C++ compiler"), result
    lines = [ln for ln in err.splitlines() if "compiled tensor-product kernel off" in ln]
    assert len(lines) == 1, err[-2000:]
    assert "no C++ compiler" in lines[0]
    assert all(d < 1e-12 for d in result["diff"].values()), result


def test_failed_build_falls_back(tmp_path):
    # A "compiler" that always fails (coreutils `false`): the build fails, the reason is named.
    result, err = _child(tmp_path, CXX=shutil.which("false"))
    assert result["status"].startswith("the build failed"), result
    assert sum("compiled tensor-product kernel off" in ln for ln in err.splitlines()) == 1
    assert all(d < 1e-12 for d in result["diff"].values()), result


def test_off_switch_by_environment(tmp_path):
    result, err = _child(tmp_path, SEARCHER_KERNELS="pytorch")
    assert result["status"] == "SEARCHER_KERNELS=pytorch"
    assert all(d < 1e-12 for d in result["diff"].values()), result


@pytest.mark.parametrize("aggregate", ["sum", "mean", "degree"])
def test_gathered_sum_equals_messages_then_aggregate(aggregate):
    # The gated family's one-pass message step (gather senders, product, sum at receivers)
    # against per-edge messages and torch_geometric's scatter (reference library), float64,
    # values and gradients of node features, edge attributes and per-edge weights; and the
    # whole gated model against e3nn's code with each aggregate.
    if kernel_module() is None:
        pytest.skip(f"compiled kernel unavailable: {kernel_status()}")
    from torch_geometric.utils import scatter

    from searcher.models import build_model, random_graph
    from searcher.models._fused import fuse_products, gathered_sum
    from searcher.testing import make_fields, model_config

    torch.manual_seed(5)
    with default_dtype(torch.float64):
        tp = _uvu("3x0e+2x1o+2x2e", 2, False)
    fuse_products(tp)
    n, e = 9, 30
    gen = torch.Generator().manual_seed(1)
    x = torch.randn(n, tp.irreps_in1.dim, generator=gen, dtype=torch.float64, requires_grad=True)
    a = torch.randn(e, tp.irreps_in2.dim, generator=gen, dtype=torch.float64, requires_grad=True)
    w = torch.randn(e, tp.weight_numel, generator=gen, dtype=torch.float64, requires_grad=True)
    src = torch.randint(0, n, (e,), generator=gen)
    dst = torch.randint(0, n - 1, (e,), generator=gen)   # node n-1 receives nothing
    got = gathered_sum(tp, x, a, w, src, dst, n)
    assert got is not None
    ref = scatter(tp(x[src], a, w), dst, 0, dim_size=n, reduce="sum")
    torch.testing.assert_close(got, ref, rtol=0, atol=1e-12)
    probe = torch.randn_like(ref)
    for g, rg in zip(torch.autograd.grad((got * probe).sum(), [x, a, w]),
                     torch.autograd.grad((ref * probe).sum(), [x, a, w])):
        torch.testing.assert_close(g, rg, rtol=0, atol=1e-12)

    fields = make_fields()
    cfg = model_config({"family": "gated", "hidden.multiplicity": 2, "hidden.lmax": 2,
                        "layers": 1, "radial.count": 4, "width": 6, "aggregate": aggregate})
    torch.manual_seed(0)
    with default_dtype(torch.float64):
        fused = build_model(cfg, fields, "anisotropy")
        plain = build_model(cfg, fields, "anisotropy", kernels="e3nn")
    plain.load_state_dict(fused.state_dict())
    graph = random_graph(fields, 10, seed=2, dtype=torch.float64)
    torch.testing.assert_close(fused(graph), plain(graph), rtol=0, atol=1e-12)


def test_double_backward_through_the_compiled_kernel_raises():
    # The kernel's backward is first order only (once_differentiable): asking for a second
    # derivative (create_graph=True, as force-matching losses do) must raise, not return a
    # silently wrong zero.  The PyTorch fallback is twice differentiable and is the route for
    # such losses (torch's own rule for once_differentiable functions).
    if kernel_module() is None:
        pytest.skip(f"compiled kernel unavailable: {kernel_status()}")
    from searcher.models._fused import fuse_products

    torch.manual_seed(0)
    with default_dtype(torch.float64):
        tp = o3.FullyConnectedTensorProduct("2x0e+2x1o", "1x0e+1x1o", "2x0e+2x1o")
    fuse_products(tp)
    x1 = torch.randn(5, tp.irreps_in1.dim, dtype=torch.float64, requires_grad=True)
    x2 = torch.randn(5, tp.irreps_in2.dim, dtype=torch.float64)
    (g,) = torch.autograd.grad(tp(x1, x2).square().sum(), x1, create_graph=True)
    with pytest.raises(RuntimeError, match="once_differentiable|twice"):
        g.sum().backward()
    with pytorch_kernels():
        (g,) = torch.autograd.grad(tp(x1, x2).square().sum(), x1, create_graph=True)
        (h,) = torch.autograd.grad(g.sum(), x1)
    # derived: for f = |T(x1, x2)|^2 with T bilinear, d/dx1 of sum(df/dx1) is 2 T^T T 1: finite
    assert torch.isfinite(h).all() and h.abs().sum() > 0
