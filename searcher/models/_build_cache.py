"""Build-once caches for e3nn's per-module set-up, shared by every model of a process.

Building a model is most of a small trial's fixed cost, and almost all of it is e3nn work
that depends only on the module's structure, never on its weights:

* every ``o3.TensorProduct`` generates its forward code with torch.fx and then optimises the
  einsum contraction order with opt_einsum_fx (about three quarters of a build on the demo),
  and builds a placeholder module for its ``right`` method (or its code, when asked);
* every gate's ``nn.Extract`` traces and compiles its split with torch.fx;
* every ``nn.normalize2mom`` (inside each gate and activation) estimates its activation's
  second moment from a million normal samples (about a fifth).

A sweep builds the same structures again and again (the layers of one model share them, and
trials redraw the same irreps), so both results are kept per structure:

* the generated code of tensor products, of ``o3.Linear`` and of ``nn.Extract``: tensor
  products through e3nn's own extension points, the ordered lists of codegen providers
  (``_CODEGEN_PROVIDERS_LEFT_RIGHT`` and ``_CODEGEN_PROVIDERS_RIGHT``, ours first; the
  placeholder by asking for the right code, :func:`_tensor_product_init`), linears
  by wrapping ``e3nn.o3._linear._codegen_linear``, extracts by wrapping
  ``Extract.__init__``.  On a miss e3nn generates as usual; every module
  then gets a *sibling* of the stored graph module (:func:`_sibling`: same generated
  forward, its own containers and buffer copies, so no two modules share a tensor);
* the moment through ``e3nn.math._normalize_activation.moment``, keyed by the function, the
  order, the dtype and the device. e3nn draws its samples from a generator seeded with 0, so
  the value is a pure function of that key;
* the rest of ``o3.TensorProduct.__init__`` (its normalised instructions, flags, dimensions
  and output mask), keyed by its arguments, e3nn's optimisation defaults and the default
  dtype; the internal weights are still drawn with e3nn's ``torch.randn`` call, in its order.

All give bit-identical modules to a build without them (tests compare the outputs), so
results stay deterministic for a given seed.  Within :func:`lean_codegen` (fused builds),
products the fused kernels will run get a stand-in with e3nn's buffers and no code
(:func:`_unfused_module`): their state dict is the same, nothing of e3nn's is generated.
The fused kernels' plans are kept here too (:func:`stored_plan`).  :func:`install` is
idempotent and runs when ``searcher.models`` is imported.
"""
from __future__ import annotations

import copy
import inspect
import threading
from collections import OrderedDict
from contextlib import contextmanager

import torch
from torch import fx

from ._flags import ThreadFlag
from ._fusable import fusable_paths

__all__ = ["install", "cache_info", "clear", "lean_codegen", "unfused", "stored_plan"]

_KEPT = 512          # structures kept per cache (oldest dropped first)
_LOCK = threading.Lock()
_GRAPHS: OrderedDict = OrderedDict()
_MOMENTS: OrderedDict = OrderedDict()
_PLANS: OrderedDict = OrderedDict()
_INITS: OrderedDict = OrderedDict()
_COUNTS = {"graph_hits": 0, "graph_misses": 0, "moment_hits": 0, "moment_misses": 0,
           "init_hits": 0, "init_misses": 0}
_STATE: dict = {}
_LEAN = ThreadFlag()
_NO_RIGHT = ThreadFlag()


def _remember(store: OrderedDict, key, value) -> None:
    store[key] = value
    while len(store) > _KEPT:
        store.popitem(last=False)


def _sibling(template: fx.GraphModule) -> fx.GraphModule:
    """A new module running ``template``'s generated code, owning copies of its buffers.

    torch.fx installs a GraphModule's compiled ``forward`` on a class made for that instance,
    so an instance of the same class runs the same code without regenerating it (a new
    ``GraphModule`` would copy the graph and recompile it: most of a warm build).  The new
    instance gets its own containers (buffers, hooks, submodules) and buffer copies; only the
    graph, which nothing mutates after code generation, is shared.
    """
    new = object.__new__(type(template))
    new.__dict__.update({k: copy.copy(v) if isinstance(v, (dict, set, list)) else v
                         for k, v in template.__dict__.items()})
    for name, buf in list(new._buffers.items()):
        if buf is not None:
            new._buffers[name] = buf.clone()
    return new


def _lookup(key, make):
    """The stored template of ``key`` (made by ``make()`` on a miss), as a sibling; a
    template may be a tuple whose first item is the graph module (e3nn's linear codegen)."""
    with _LOCK:
        template = _GRAPHS.get(key)
        if template is not None:
            _GRAPHS.move_to_end(key)
            _COUNTS["graph_hits"] += 1
    if template is None:
        template = make()
        with _LOCK:
            _COUNTS["graph_misses"] += 1
            _remember(_GRAPHS, key, template)
    if isinstance(template, tuple):
        return (_sibling(template[0]), *template[1:])
    return _sibling(template)


def _left_right(irreps_in1, irreps_in2, irreps_out, instructions, shared_weights=False,
                specialized_code=True, optimize_einsums=True):
    """Tensor-product codegen provider with e3nn's signature, stored per structure.

    Inside :func:`lean_codegen`, products the fused kernels will evaluate get no generated
    code at all (:func:`_unfused_module`: e3nn's Wigner 3j buffers, a forward that raises).
    """
    if _LEAN.active and fusable_paths(instructions):
        key = ("unfused", str(irreps_in1), str(irreps_in2), str(irreps_out),
               tuple(instructions), bool(specialized_code), torch.get_default_dtype())
        return _lookup(key, lambda: _unfused_module(irreps_in1, irreps_in2, irreps_out,
                                                    instructions, specialized_code))
    key = ("tp", str(irreps_in1), str(irreps_in2), str(irreps_out), tuple(instructions),
           bool(shared_weights), bool(specialized_code), bool(optimize_einsums),
           torch.get_default_dtype())
    return _lookup(key, lambda: _STATE["codegen"](
        irreps_in1, irreps_in2, irreps_out, instructions, shared_weights, specialized_code,
        optimize_einsums))


def _right(irreps_in1, irreps_in2, irreps_out, instructions, shared_weights=False,
           specialized_code=True, optimize_einsums=True):
    """e3nn's codegen of a tensor product's ``right`` method, stored per structure.

    Inside :func:`_tensor_product_init` for a product built without ``compile_right`` (all of
    ours) it gives e3nn's placeholder module instead, also stored: e3nn builds and compiles
    that placeholder on every construction."""
    if _NO_RIGHT.active:
        return _lookup(("no-right",), _right_placeholder)
    key = ("right", str(irreps_in1), str(irreps_in2), str(irreps_out), tuple(instructions),
           bool(shared_weights), bool(specialized_code), bool(optimize_einsums),
           torch.get_default_dtype())
    return _lookup(key, lambda: _STATE["right"](
        irreps_in1, irreps_in2, irreps_out, instructions, shared_weights, specialized_code,
        optimize_einsums))


def _right_placeholder() -> fx.GraphModule:
    # e3nn's own placeholder for an uncompiled ``right`` (o3.TensorProduct.__init__): it
    # returns its input and must not be empty (an empty graph fails to unpickle).
    graph = fx.Graph()
    x2 = graph.placeholder("x2", torch.Tensor)
    graph.placeholder("w", torch.Tensor)
    graph.output(x2)
    return fx.GraphModule(torch.nn.Module(), graph, class_name="tp_forward")


def _tensor_product_init(self, *args, **kwargs):
    """``o3.TensorProduct.__init__``, its set-up stored per structure.

    e3nn compiles the right method only on request (``compile_right``, default False) and
    otherwise builds a placeholder graph module; here the request always reaches the provider
    list, which answers with the stored placeholder when the caller did not ask.

    The rest of e3nn's set-up is a pure function of the arguments, e3nn's optimisation
    defaults and the default dtype, except the internal weights' ``torch.randn`` draw: its
    normalised instruction list (a loop over instruction pairs, a third of a warm build on
    the demo), dimensions, flags and output mask are kept after the first construction, and
    a later one (:func:`_from_template`) sets them, registers code from the providers as
    e3nn does, and draws the weights in e3nn's order with e3nn's call."""
    bound = _STATE["tp_signature"].bind(self, *args, **kwargs)
    if bound.arguments.get("compile_right", False):
        return _STATE["tp_init"](*bound.args, **bound.kwargs)
    key = _init_key(bound.arguments)
    with _LOCK:
        template = _INITS.get(key) if key is not None else None
        if template is not None:
            _INITS.move_to_end(key)
            _COUNTS["init_hits"] += 1
    if template is not None:
        _from_template(self, template)
        return None
    bound.arguments["compile_right"] = True
    with _NO_RIGHT.on():
        _STATE["tp_init"](*bound.args, **bound.kwargs)
    self._did_compile_right = False
    if key is not None:
        with _LOCK:
            _COUNTS["init_misses"] += 1
            _remember(_INITS, key, _template_of(self))
    return None


_MODULE_KEYS = frozenset(torch.nn.Module().__dict__) | {"__codegen__"}


def _init_key(arguments: dict):
    """The structure key of a ``TensorProduct.__init__`` call, None when it holds tensors
    (variances given as tensors) or code that runs left-right placeholders."""
    import e3nn
    from e3nn import o3

    args = dict(arguments)
    args.pop("self", None)
    if not args.get("compile_left_right", True):
        return None
    key = []
    for name, value in sorted(args.items()):
        if name.startswith("irreps_"):
            value = str(o3.Irreps(value))
        elif name == "instructions":
            value = tuple(tuple(ins) for ins in value)
        elif isinstance(value, (list, tuple)):
            value = tuple(float(v) for v in value)
        elif value is not None and not isinstance(value, (str, bool, int, float)):
            return None
        key.append((name, value))
    defaults = tuple(sorted(e3nn.get_optimization_defaults().items()))
    return ("tp-init", tuple(key), defaults, torch.get_default_dtype())


def _template_of(tp) -> dict:
    """What :func:`_from_template` needs of a freshly built product ``tp``."""
    weight = tp._parameters.get("weight")
    return {"attrs": {k: v for k, v in tp.__dict__.items() if k not in _MODULE_KEYS},
            "weight": None if weight is None else weight.numel(),
            "mask": tp._buffers["output_mask"].detach().clone()}


def _from_template(tp, template: dict) -> None:
    """The tail of e3nn's ``TensorProduct.__init__`` from stored set-up (same order of
    registration, same random draw)."""
    torch.nn.Module.__init__(tp)
    tp.__dict__.update({k: copy.copy(v) if isinstance(v, (list, dict)) else v
                        for k, v in template["attrs"].items()})
    code = (tp.irreps_in1, tp.irreps_in2, tp.irreps_out, tp.instructions, tp.shared_weights,
            tp._specialized_code, tp._optimize_einsums)
    with _NO_RIGHT.on():
        right = _right(*code)
    tp._codegen_register({"_compiled_main_left_right": _left_right(*code),
                          "_compiled_main_right": right})
    if template["weight"] is not None:
        tp.weight = torch.nn.Parameter(torch.randn(template["weight"]))
    else:
        tp.register_buffer("weight", torch.Tensor())
    tp.register_buffer("output_mask", template["mask"].clone())


def _extract_init(self, irreps_in, irreps_outs, instructions, squeeze_out: bool = False):
    """``e3nn.nn.Extract.__init__`` with its traced code stored per structure.

    Every gate builds an ``Extract`` (its scalar/gate/gated split), which traces a torch.fx
    graph and compiles it.  On a hit the module gets e3nn's attributes and a sibling of the
    stored graph module (an ``Extract`` owns no buffers or parameters)."""
    from e3nn import o3

    irreps_in = o3.Irreps(irreps_in)
    outs = tuple(o3.Irreps(irreps) for irreps in irreps_outs)
    key = ("extract", str(irreps_in), tuple(str(o) for o in outs),
           tuple(tuple(ins) for ins in instructions), bool(squeeze_out))
    with _LOCK:
        template = _GRAPHS.get(key)
        if template is not None:
            _GRAPHS.move_to_end(key)
            _COUNTS["graph_hits"] += 1
    if template is None:
        _STATE["extract"](self, irreps_in, outs, instructions, squeeze_out)
        with _LOCK:
            _COUNTS["graph_misses"] += 1
            _remember(_GRAPHS, key, _sibling(self._compiled_forward))
        return
    torch.nn.Module.__init__(self)
    self.irreps_in, self.irreps_outs, self.instructions = irreps_in, outs, instructions
    self._codegen_register({"_compiled_forward": _sibling(template)})


def _linear(irreps_in, irreps_out, instructions, f_in=None, f_out=None,
            shared_weights=False, optimize_einsums=True):
    """e3nn's ``_codegen_linear`` (graph module, weight and bias counts), stored."""
    key = ("linear", str(irreps_in), str(irreps_out), tuple(instructions), f_in, f_out,
           bool(shared_weights), bool(optimize_einsums), torch.get_default_dtype())
    return _lookup(key, lambda: _STATE["linear"](
        irreps_in, irreps_out, instructions, f_in, f_out, shared_weights, optimize_einsums))


def stored_plan(key, make):
    """The fused-kernel plan of structure ``key`` (``make()`` on a miss); plans hold only
    constants, so every module of that structure shares one."""
    with _LOCK:
        plan = _PLANS.get(key)
        if plan is not None:
            _PLANS.move_to_end(key)
            return plan
    plan = make()
    with _LOCK:
        _remember(_PLANS, key, plan)
    return plan


def _not_generated(x1, x2, w):
    if isinstance(x1, fx.Proxy):
        # Unpickling a graph module re-traces its code: record this call again, don't make it.
        return x1.tracer.create_proxy("call_function", _not_generated, (x1, x2, w), {})
    raise RuntimeError("this tensor product was built for the fused kernel "
                       "(searcher.models._fused) and has no e3nn code; build the model with "
                       "kernels='e3nn' to run e3nn's")


def _unfused_module(irreps_in1, irreps_in2, irreps_out, instructions,
                    specialized_code) -> fx.GraphModule:
    """A stand-in for e3nn's generated module of a product the fused kernel runs.

    It registers exactly the Wigner 3j buffers e3nn's code generation would (for ``uvw`` /
    ``uvu`` paths with weights, every path unless ``specialized_code`` handles it without
    one, i.e. when an order is 0), so state dicts match a plain e3nn build key for key; its
    forward raises.  Building it skips e3nn's fx tracing and einsum-order search, the bulk
    of a cold build.
    """
    from e3nn import o3

    graph = fx.Graph()
    args = tuple(graph.placeholder(name, torch.Tensor) for name in ("x1", "x2", "w"))
    graph.output(graph.call_function(_not_generated, args))
    module = fx.GraphModule(torch.nn.Module(), graph, class_name="tp_forward")
    for ins in instructions:
        parts = (irreps_in1[ins.i_in1], irreps_in2[ins.i_in2], irreps_out[ins.i_out])
        if 0 in ins.path_shape or any(p.dim == 0 for p in parts):
            continue
        ls = tuple(p.ir.l for p in parts)
        name = "_w3j_{}_{}_{}".format(*ls)
        if not (specialized_code and 0 in ls) and name not in module._buffers:
            module.register_buffer(name, o3.wigner_3j(*ls))
    module.searcher_unfused = True
    return module


def unfused(module: torch.nn.Module) -> bool:
    """Whether ``module`` is a stand-in made by :func:`_unfused_module`."""
    return bool(getattr(module, "searcher_unfused", False))


@contextmanager
def lean_codegen():
    """Within the block, tensor products with :func:`fusable_paths` get no generated code
    (``build_model`` with fused kernels switches every one of them to the fused kernel)."""
    with _LEAN.on():
        yield


def _moment(f, n, dtype=None, device=None):
    """e3nn's ``moment`` (``<f(z)^n>``, z standard normal from a generator seeded 0), kept."""
    try:
        key = (f, int(n), dtype, str(device) if device is not None else None,
               torch.get_default_dtype())
        hash(key)
    except TypeError:          # an unhashable callable: nothing to key on
        return _STATE["moment"](f, n, dtype=dtype, device=device)
    with _LOCK:
        if key in _MOMENTS:
            _COUNTS["moment_hits"] += 1
            return _MOMENTS[key].clone()
    value = _STATE["moment"](f, n, dtype=dtype, device=device)
    with _LOCK:
        _COUNTS["moment_misses"] += 1
        _remember(_MOMENTS, key, value.detach().clone())
    return value


def install() -> None:
    """Put both caches in place (idempotent)."""
    import e3nn.math._normalize_activation as norm_mod
    import e3nn.o3._linear as linear_mod
    import e3nn.o3._tensor_product._tensor_product as tp_mod
    from e3nn.nn._extract import Extract
    from e3nn.o3._tensor_product._codegen import (codegen_tensor_product_left_right,
                                                  codegen_tensor_product_right)

    with _LOCK:
        if _STATE:
            return
        _STATE["codegen"] = codegen_tensor_product_left_right
        _STATE["moment"] = norm_mod.moment
        _STATE["linear"] = linear_mod._codegen_linear
        _STATE["right"] = codegen_tensor_product_right
        _STATE["extract"] = Extract.__init__
        _STATE["tp_init"] = tp_mod.TensorProduct.__init__
        _STATE["tp_signature"] = inspect.signature(tp_mod.TensorProduct.__init__)
        tp_mod._CODEGEN_PROVIDERS_LEFT_RIGHT.insert(0, _left_right)
        tp_mod._CODEGEN_PROVIDERS_RIGHT.insert(0, _right)
        Extract.__init__ = _extract_init
        tp_mod.TensorProduct.__init__ = _tensor_product_init
        norm_mod.moment = _moment
        linear_mod._codegen_linear = _linear


def cache_info() -> dict:
    """Hits and misses of both caches since the process started (or :func:`clear`)."""
    with _LOCK:
        return {**_COUNTS, "graphs": len(_GRAPHS), "moments": len(_MOMENTS),
                "plans": len(_PLANS), "inits": len(_INITS)}


def clear() -> None:
    """Forget every stored structure (the next builds generate again)."""
    with _LOCK:
        _GRAPHS.clear()
        _MOMENTS.clear()
        _PLANS.clear()
        _INITS.clear()
        for key in _COUNTS:
            _COUNTS[key] = 0
