"""Cost model: parameters, multiply-adds per edge and per node, one measured training step.

Multiply-adds are counted from the modules' own irreps descriptions:

- e3nn ``TensorProduct`` (also the products inside gates), per instruction (path) with
  orders l1 ⊗ l2 → l3: ``P·nnz(C) + W·(2 l3 + 1)``.  ``P`` = input pairs the path couples
  (``mul1·mul2`` for uvw/uvu/uvv, ``mul1`` for uuu/uuw), ``nnz(C)`` = non-zero
  Clebsch–Gordan coefficients of (l1, l2, l3) (``o3.wigner_3j``), ``W`` = the path's weight
  count (``prod(path_shape)``; 0 without weights): each pair is contracted with C, then
  each weight is applied once per output component.
- e3nn ``Linear``: ``Σ mul_in·mul_out·(2l+1)`` over its paths; ``torch.nn.Linear``:
  ``in·out``; e3nn ``FullyConnectedNet``: ``Σ h_k·h_{k+1}``.
- Activations, norms, spherical harmonics and radial bases are elementwise and not counted.

A module marked per edge (``per_edge``) runs once per edge, everything else once per node.
``madds_per_epoch = (per_edge·E + per_node·N)·graphs·3``: forward + backward ≈ 3 forward
passes (common practice).
"""
from __future__ import annotations

import math
import statistics
import time
from dataclasses import asdict, dataclass
from functools import cache

import torch
from e3nn import nn as enn
from e3nn import o3
from torch_geometric.data import Batch


from ._probe import random_graph

__all__ = ["Cost", "count_madds", "estimate_cost", "tensor_product_madds"]


@dataclass
class Cost:
    """Estimated cost of a model on a dataset (see the module docstring for the formulas)."""

    params: int
    madds_per_edge: int
    madds_per_node: int
    madds_per_epoch: float
    step_ms: float | None  # None: not timed

    def to_dict(self) -> dict:
        return asdict(self)


@cache
def _cg_nonzeros(l1: int, l2: int, l3: int) -> int:
    return int((o3.wigner_3j(l1, l2, l3, dtype=torch.float64).abs() > 1e-10).sum())


def tensor_product_madds(tp: o3.TensorProduct) -> int:
    """Multiply-adds of one evaluation of an e3nn tensor product (module docstring)."""
    total = 0
    for ins in tp.instructions:
        a, b, c = tp.irreps_in1[ins.i_in1], tp.irreps_in2[ins.i_in2], tp.irreps_out[ins.i_out]
        pairs = a.mul * b.mul if ins.connection_mode in ("uvw", "uvu", "uvv") else a.mul
        weights = math.prod(ins.path_shape) if ins.has_weight else 0
        total += pairs * _cg_nonzeros(a.ir.l, b.ir.l, c.ir.l) + weights * c.ir.dim
    return total


def _module_madds(module: torch.nn.Module) -> int | None:
    if isinstance(module, o3.TensorProduct):
        return tensor_product_madds(module)
    if isinstance(module, o3.Linear):
        return sum(math.prod(ins.path_shape) * module.irreps_in[ins.i_in].ir.dim
                   for ins in module.instructions)
    if isinstance(module, torch.nn.Linear):
        return module.in_features * module.out_features
    if isinstance(module, enn.FullyConnectedNet):
        return sum(a * b for a, b in zip(module.hs[:-1], module.hs[1:]))
    return None


def count_madds(model: torch.nn.Module) -> tuple[int, int]:
    """``(per_edge, per_node)`` multiply-adds of one forward pass of ``model``."""
    sums = {True: 0, False: 0}

    def walk(module: torch.nn.Module, edge: bool) -> None:
        edge = edge or bool(getattr(module, "per_edge", False))
        count = _module_madds(module)
        if count is not None:
            sums[edge] += count
            return
        for child in module.children():
            walk(child, edge)

    walk(model, False)
    return sums[True], sums[False]


def _probe_batch(model, stats: dict, batch_size: int) -> Batch:
    nodes = max(2, round(float(stats.get("nodes_mean", 16))))
    degree = float(stats.get("edges_mean", 6 * nodes)) / nodes
    graphs = [random_graph(model.fields, nodes, seed, degree=degree,
                           dtype=next(model.parameters()).dtype) for seed in range(batch_size)]
    return Batch.from_data_list(graphs)


def _step_ms(model: torch.nn.Module, batch: Batch, repeats: int) -> float:
    # Timed on the model itself and put back afterwards: a deep copy of an e3nn model costs
    # more than the steps (its fx modules recompile), and the state dict holds every
    # parameter and buffer the Adam steps and batch-norm statistics move.
    saved = {k: v.detach().clone() for k, v in model.state_dict().items()}
    was_training = model.training
    params = list(model.parameters())
    opt = torch.optim.Adam(params, lr=1e-3)
    model.train()

    def step() -> None:
        opt.zero_grad()
        model(batch).pow(2).mean().backward()
        opt.step()

    try:
        step()  # warm-up: first calls allocate and build caches
        times = []
        for _ in range(repeats):
            start = time.perf_counter()
            step()
            times.append((time.perf_counter() - start) * 1e3)
    finally:
        for p in params:
            p.grad = None
        model.load_state_dict(saved)
        model.train(was_training)
    return statistics.median(times)


def estimate_cost(model: torch.nn.Module, stats: dict, *, batch_size: int = 8,
                  repeats: int = 3) -> Cost:
    """Parameters, multiply-adds and the measured time of one Adam step.

    Args:
        model: a model from :func:`build_model`.
        stats: ``graphs`` (training graphs per epoch), ``nodes_mean``, ``edges_mean``
            (per graph), as :func:`searcher.data.graph_stats` names them.
        batch_size: graphs in the probe batch that is timed.
        repeats: timed steps after one warm-up (the median is reported); 0 leaves the
            step untimed (``step_ms`` None).

    Example::

        estimate_cost(model, {"graphs": 28, "nodes_mean": 32, "edges_mean": 200})
        # Cost(params=..., madds_per_edge=..., madds_per_node=..., ...)
    """
    per_edge, per_node = count_madds(model)
    nodes = float(stats.get("nodes_mean", 0))
    edges = float(stats.get("edges_mean", 0))
    epoch = (per_edge * edges + per_node * nodes) * float(stats.get("graphs", 0)) * 3
    ms = _step_ms(model, _probe_batch(model, stats, batch_size), repeats) if repeats else None
    return Cost(sum(p.numel() for p in model.parameters()), per_edge, per_node, epoch, ms)
