"""The equivariance gate: every candidate is measured before it trains.

The tested function takes positions and input fields, rebuilds the radius graph and every
attribute from them, and runs the model; e3nn's ``equivariance_error`` then compares
``f(g·x)`` with ``g·f(x)`` for random rotations, reflections and translations.  A second,
independent check uses scipy's random rotations with ``Irreps.D_from_matrix``.
"""
from __future__ import annotations

import contextlib
import copy
import math
import re
from dataclasses import asdict, dataclass

import numpy as np
import torch
from e3nn import o3
from e3nn.util.test import equivariance_error
from scipy.spatial.transform import Rotation

from ._build import build_model
from ._cutoff import resolve_cutoff
from ._probe import graph_from, random_graph

__all__ = ["GateResult", "run_gate", "gate_model", "gate_function", "default_dtype",
           "forget_verdicts"]

GATE_NODES = 12


@contextlib.contextmanager
def default_dtype(dtype: torch.dtype):
    # e3nn computes Wigner D matrices (and its tensor-product constants) in the default
    # dtype, so a float64 check needs float64 as the default, not only float64 tensors.
    old = torch.get_default_dtype()
    torch.set_default_dtype(dtype)
    try:
        yield
    finally:
        torch.set_default_dtype(old)


@dataclass
class GateResult:
    """Outcome of the gate.

    Errors are the largest componentwise difference between ``f(g·x)`` and ``g·f(x)``,
    divided by ``max(1, max|f(x)|)``: relative to the output scale once outputs exceed 1, so
    an untrained deep network with large activations is not rejected for round-off, while a
    real defect (errors of order the output itself) still is.
    """

    params: int
    equivariance_error: float      # e3nn equivariance_error, float64
    equivariance_error_f32: float | None  # the same in float32 (informative; None: skipped)
    second_check_error: float      # scipy rotation + reflection, float64
    passed: bool
    reason: str
    equivariant: bool              # False for the baselines (measured, never rejected)

    def to_dict(self) -> dict:
        return asdict(self)


def gate_function(model: torch.nn.Module, fields: dict, radius: float):
    """``(f, names, irreps_in, irreps_out)`` of the tested function.

    ``f(pos, *inputs)`` rebuilds the graph from ``pos`` and runs the model; ``inputs`` are
    every input field (``names``, in ``fields`` order; the model reads those it uses);
    ``irreps_in`` starts with ``"cartesian_points"`` for the positions.
    """
    names = [f.name for f in fields.values() if f.role == "input"]

    def f(pos: torch.Tensor, *inputs: torch.Tensor) -> torch.Tensor:
        return model(graph_from(pos, dict(zip(names, inputs)), radius))

    irreps_in = ["cartesian_points"] + [o3.Irreps(fields[n].irreps) for n in names]
    return f, names, irreps_in, model.irreps_out


def _e3nn_error(model, fields, graph, radius, scale: float) -> float:
    f, names, irreps_in, irreps_out = gate_function(model, fields, radius)
    dtype = next(model.parameters()).dtype
    args = [graph.pos.to(dtype)] + [getattr(graph, n).to(dtype) for n in names]
    with torch.no_grad():
        errors = equivariance_error(f, args, irreps_in=irreps_in, irreps_out=[irreps_out],
                                    do_parity=True, do_translation=True)
        return max(float(v.max()) for v in errors.values()) / scale


def _scipy_error(model, fields, graph, radius, seed: int) -> tuple[float, float]:
    """Largest error under a scipy rotation and its inversion, and the output scale
    ``max(1, max|f(x)|)`` that every error of the gate is divided by."""
    f, names, irreps_in, irreps_out = gate_function(model, fields, radius)
    args = [graph.pos] + [getattr(graph, n) for n in names]
    rot = torch.as_tensor(Rotation.random(random_state=seed).as_matrix(), dtype=torch.float64)
    shift = torch.as_tensor(np.random.default_rng(seed).normal(size=(1, 3)) * 3.0)
    worst = 0.0
    with torch.no_grad():
        base = f(*args)
        for g in (rot, -rot):  # a proper rotation, then the same composed with inversion
            moved = [args[0] @ g.T + shift] + [x @ ir.D_from_matrix(g).T
                                                for x, ir in zip(args[1:], irreps_in[1:])]
            expect = base @ irreps_out.D_from_matrix(g).T
            worst = max(worst, float((f(*moved) - expect).abs().max()))
        scale = max(1.0, float(base.abs().max()))
        return worst / scale, scale


def gate_model(model: torch.nn.Module, fields: dict, *, seed: int = 0,
               tol: float = 1e-9) -> GateResult:
    """Gate an already built model; it is changed only during the check and restored.

    Args:
        model: a model from :func:`build_model` (or anything with ``irreps_out``,
            ``equivariant`` and ``forward(data)``).
        fields: field name → Field, as given to the model.
        seed: seed of the probe graph, its inputs and the rotations.
        tol: largest float64 error an equivariant model may show.
    """
    with default_dtype(torch.float64), exact_float64(model) as m64:
        return _gate(m64, fields, seed, tol)


_W3J = re.compile(r"_w3j_(\d+)_(\d+)_(\d+)$")


@contextlib.contextmanager
def exact_float64(model: torch.nn.Module):
    """The model itself, for the duration of the block in float64 with exact constants.

    e3nn tensor products hold their Wigner 3j symbols as buffers made in the default dtype
    when the model was built. A model built in float32 and upcast keeps float32-rounded
    coupling coefficients, a genuine ~1e-7 symmetry break that would hide any real defect
    below it; so they are rebuilt in float64. The model is converted in place rather than
    deep-copied (a copy of an e3nn model costs about half a second: its fx modules
    recompile); on exit its dtype, Wigner buffers, parameters and every buffer (batch-norm
    running statistics that the checks' forward passes moved) are restored exactly, since
    float32 -> float64 -> float32 is lossless.
    """
    dtype = next(model.parameters()).dtype
    saved = {k: v.detach().clone() for k, v in model.state_dict().items()}
    originals = []
    model.to(torch.float64)
    for name, _ in list(model.named_buffers()):
        match = _W3J.search(name)
        if match:
            owner_name, leaf = name.rsplit(".", 1) if "." in name else ("", name)
            owner = model.get_submodule(owner_name)
            originals.append((owner, leaf, getattr(owner, leaf)))
            l1, l2, l3 = (int(g) for g in match.groups())
            setattr(owner, leaf, o3.wigner_3j(l1, l2, l3, dtype=torch.float64))
    try:
        yield model
    finally:
        model.to(dtype)
        for owner, leaf, buf in originals:
            setattr(owner, leaf, buf.to(dtype))
        model.load_state_dict(saved)


def _gate(m64: torch.nn.Module, fields: dict, seed: int, tol: float,
          float32: bool = True) -> GateResult:
    geometry = getattr(m64, "geometry", None)
    cutoff = geometry.radial.cutoff if geometry is not None else 1.0
    # Every edge inside the radial cutoff, so the radial features take part.
    graph = random_graph(fields, GATE_NODES, seed, radius=0.9 * cutoff, dtype=torch.float64)
    params = sum(p.numel() for p in m64.parameters())
    equivariant = bool(getattr(m64, "equivariant", True))
    with torch.random.fork_rng(devices=[]):
        torch.manual_seed(seed)  # e3nn draws its random transforms from torch's RNG
        with default_dtype(torch.float64):
            second, scale = _scipy_error(m64, fields, graph, graph.graph_radius, seed)
            err64 = _e3nn_error(m64, fields, graph, graph.graph_radius, scale)
        err32 = None
        if float32:  # informative only; converted in place (restored by exact_float64)
            with default_dtype(torch.float32):
                err32 = _e3nn_error(m64.to(torch.float32), fields, graph, graph.graph_radius,
                                    scale)
    worst = max(err64, second)
    if not equivariant:
        return GateResult(params, err64, err32, second, True,
                          f"baseline: not equivariant by design (error {worst:.3g})", False)
    if math.isnan(worst) or worst > tol:
        return GateResult(params, err64, err32, second, False,
                          f"equivariance error {worst:.3g} exceeds the tolerance {tol:g} "
                          f"(float64)", True)
    return GateResult(params, err64, err32, second, True, "", True)


def run_gate(model_cfg: dict, fields: dict, target: str, *, seed: int = 0,
             tol: float = 1e-9, stats: dict | None = None,
             built: torch.nn.Module | None = None, float32: bool = True) -> GateResult:
    """Build the model of ``model_cfg`` (seeded) and gate it; see :func:`gate_model`.

    Args:
        stats: data statistics passed to :func:`build_model` (``degree_mean``), so the gated
            model is the one that will train.
        built: the model already built from ``model_cfg`` (with ``stats``); when given it is
            gated (converted to exact float64 for the check, then restored) instead of
            building a second one.  It must be that config's model: the verdict is kept under ``model_cfg``.
        float32: also measure the float32 error (informative, never decides; the search
            skips it, saving 9 of the gate's 20 forward passes).

    The verdict of an architecture is measured once per process, with the seed of the first
    call; later calls with the same model section, fields, target, tolerance and stats (any
    seed) return a copy of it.

    Example::

        run_gate(cfg["model"], fields, "anisotropy").passed   # True
    """
    model_cfg = resolve_cutoff(model_cfg, stats)
    key = _verdict_key(model_cfg, fields, target, tol, stats, float32)
    if key not in _VERDICTS:
        with torch.random.fork_rng(devices=[]), default_dtype(torch.float64):
            torch.manual_seed(seed)
            if built is None:
                _VERDICTS[key] = _gate(build_model(model_cfg, fields, target, stats=stats),
                                       fields, seed, tol, float32)
            else:
                with exact_float64(built) as m64:
                    _VERDICTS[key] = _gate(m64, fields, seed, tol, float32)
        while len(_VERDICTS) > _VERDICTS_KEPT:
            _VERDICTS.pop(next(iter(_VERDICTS)))
    return copy.deepcopy(_VERDICTS[key])


# Verdicts of architectures gated in this process.  Equivariance is a property of the
# architecture (irreps, paths, blocks), not of initial weights, so a sweep that draws the same
# model section again, with another trial seed, reuses the first verdict instead of building
# and checking the model again (about 2 s a trial on the demo).
_VERDICTS: dict[str, GateResult] = {}
_VERDICTS_KEPT = 256


def _verdict_key(model_cfg: dict, fields: dict, target: str, tol: float, stats,
                 float32: bool) -> str:
    from searcher.spec import config_hash

    described = {k: [f.name, f.kind, str(f.irreps), f.role, f.level] for k, f in fields.items()}
    return config_hash({"model": model_cfg, "fields": described, "target": target,
                        "tol": float(tol), "stats": stats or {}, "float32": bool(float32)})


def forget_verdicts() -> None:
    """Forget every kept verdict (benchmarks start sweeps cold with it)."""
    _VERDICTS.clear()
