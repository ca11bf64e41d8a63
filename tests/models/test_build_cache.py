"""Build-once caches of e3nn set-up: modules identical to e3nn's own uncached build."""
from __future__ import annotations

import e3nn.math._normalize_activation as norm_mod
import e3nn.o3._tensor_product._tensor_product as tp_mod
import torch
from e3nn.nn._extract import Extract
from e3nn.o3._tensor_product._codegen import (codegen_tensor_product_left_right,
                                              codegen_tensor_product_right)
from torch import fx

from searcher.models import build_model, random_graph
from searcher.models import _build_cache
from searcher.testing import make_fields, model_config

FIELDS = make_fields()
CFG = model_config({"family": "steerable", "hidden.multiplicity": 2, "hidden.lmax": 2,
                    "layers": 2, "radial.count": 4, "width": 6, "norm": "batch"})


def _build_and_run(cfg, kernels="fused"):
    torch.manual_seed(0)
    model = build_model(cfg, FIELDS, "anisotropy", kernels=kernels)
    graph = random_graph(FIELDS, 10, seed=4)
    return model, model(graph)


def test_cached_build_is_identical_to_e3nn_uncached(monkeypatch):
    # Reference: e3nn's own path, its codegen provider list without ours and its moment().
    _build_cache.clear()
    cold_model, cold = _build_and_run(CFG)
    warm_model, warm = _build_and_run(CFG)
    info = _build_cache.cache_info()
    assert info["graph_hits"] > 0 and info["moment_hits"] > 0
    monkeypatch.setattr(tp_mod, "_CODEGEN_PROVIDERS_LEFT_RIGHT",
                        [codegen_tensor_product_left_right])
    monkeypatch.setattr(tp_mod, "_CODEGEN_PROVIDERS_RIGHT", [codegen_tensor_product_right])
    monkeypatch.setattr(Extract, "__init__", _build_cache._STATE["extract"])
    monkeypatch.setattr(tp_mod.TensorProduct, "__init__", _build_cache._STATE["tp_init"])
    monkeypatch.setattr(norm_mod, "moment", _build_cache._STATE["moment"])
    ref_model, ref = _build_and_run(CFG)
    assert torch.equal(cold, ref) and torch.equal(warm, ref)
    ref_state = ref_model.state_dict()
    for model in (cold_model, warm_model):
        state = model.state_dict()
        assert state.keys() == ref_state.keys()
        assert all(torch.equal(state[k], ref_state[k]) for k in ref_state)


def test_cached_modules_share_no_tensors():
    # Two models of one structure must not share a buffer: converting one (as the gate does)
    # leaves the other's Wigner 3j constants in float32.
    _build_cache.clear()
    first, _ = _build_and_run(CFG)
    second, _ = _build_and_run(CFG)
    ptrs = {b.data_ptr() for b in first.buffers() if b.numel()}
    assert not ptrs & {b.data_ptr() for b in second.buffers() if b.numel()}
    first.to(torch.float64)
    assert all(b.dtype != torch.float64 for b in second.buffers())


def test_cached_models_copy_and_pickle():
    # Trainers copy the best state and the dossier saves models: a deep copy and a pickle
    # round trip of a cached build must run the same function (torch.equal on one graph).
    import copy
    import pickle

    _build_cache.clear()
    _build_and_run(CFG)
    model, out = _build_and_run(CFG)
    graph = random_graph(FIELDS, 10, seed=4)
    assert torch.equal(copy.deepcopy(model)(graph), out)
    assert torch.equal(pickle.loads(pickle.dumps(model))(graph), out)


def test_a_warm_build_generates_no_e3nn_code(monkeypatch):
    # A later trial of an architecture the worker has built (the warm trial of the overhead
    # figure) must not run e3nn's code generation or moment estimate at all: every lookup hits,
    # and no torch.fx graph is compiled to Python (e3nn compiles every generated module).
    compiled = []
    recompile = fx.GraphModule.recompile
    monkeypatch.setattr(fx.GraphModule, "recompile",
                        lambda self: compiled.append(1) or recompile(self))
    for family, kernels in (("steerable", "e3nn"), ("gated", "e3nn"), ("steerable", "fused"),
                            ("gated", "fused")):
        cfg = model_config({"family": family, "hidden.multiplicity": 2, "hidden.lmax": 2,
                            "layers": 2, "radial.count": 4, "width": 6})
        _build_cache.clear()
        _build_and_run(cfg, kernels)
        cold = _build_cache.cache_info()
        assert compiled, family  # the cold build did generate, so the counter sees it
        compiled.clear()
        _build_and_run(cfg, kernels)
        warm = _build_cache.cache_info()
        assert not compiled, (family, kernels, len(compiled))
        assert warm["graph_misses"] == cold["graph_misses"], family
        assert warm["moment_misses"] == cold["moment_misses"], family
        assert warm["graph_hits"] + warm["moment_hits"] > cold["graph_hits"] + cold["moment_hits"]


def _product_kinds():
    from e3nn import o3

    """(constructor, whether its set-up is stored)."""
    yield (lambda: o3.FullyConnectedTensorProduct("2x0e+2x1o", "1x0e+1x1o+1x2e",
                                                  "3x0e+2x1o+1x2e")), True
    yield (lambda: o3.FullyConnectedTensorProduct("2x0e+1x1e", "1x1o", "2x1o+1x1e",
                                                  irrep_normalization="norm",
                                                  path_normalization="path")), True
    yield (lambda: o3.TensorProduct("2x0e+2x1o", "1x0e+1x1o", "2x0e+2x1o",
                                    [(0, 0, 0, "uvu", True), (1, 1, 0, "uvu", True),
                                     (1, 0, 1, "uvu", True, 0.5)],
                                    shared_weights=False, internal_weights=False)), True
    yield (lambda: o3.ElementwiseTensorProduct("2x0e+2x1o", "2x0e+2x1e")), True
    # variances given as a tensor have no key: e3nn builds it every time
    yield (lambda: o3.FullyConnectedTensorProduct("2x0e", "1x0e", "1x0e",
                                                  in1_var=torch.tensor([2.0]))), False


def test_stored_product_set_up_equals_e3nns_construction(monkeypatch):
    # Reference: e3nn's own TensorProduct.__init__.  The second construction of each
    # structure comes from the stored set-up; it must give the same module (instructions and
    # their normalisation, weights drawn from the same RNG state, buffers, outputs) and leave
    # the RNG where e3nn leaves it, so a model's later draws do not move.
    def snapshot(make):
        torch.manual_seed(3)
        tp = make()
        after = torch.randn(4)
        x1 = torch.randn(5, tp.irreps_in1.dim)
        x2 = torch.randn(5, tp.irreps_in2.dim)
        w = None if tp.shared_weights else torch.randn(5, tp.weight_numel)
        out = tp(x1, x2) if w is None else tp(x1, x2, w)
        return (tp.instructions, tp.weight_numel, str(tp), tp._profiling_str,
                tp.internal_weights, tp.shared_weights, list(tp.state_dict().items()),
                after, out)

    def same(a, b):
        assert a[:6] == b[:6]
        assert [k for k, _ in a[6]] == [k for k, _ in b[6]]
        assert all(torch.equal(x, y) for (_, x), (_, y) in zip(a[6], b[6]))
        assert torch.equal(a[7], b[7]) and torch.equal(a[8], b[8])

    for make, stored in _product_kinds():
        _build_cache.clear()
        first, second = snapshot(make), snapshot(make)
        assert _build_cache.cache_info()["init_hits"] == int(stored)
        with monkeypatch.context() as m:
            m.setattr(tp_mod.TensorProduct, "__init__", _build_cache._STATE["tp_init"])
            ref = snapshot(make)
        same(first, ref)
        same(second, ref)
