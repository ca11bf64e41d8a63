"""``loop_vs_reference`` and ``flop_utilisation``: the trainer against a hand-written loop.

Both sides train the same architecture from the same initial state dict on the same graphs
(``fidelity_graphs`` of the demo dataset) for the same number of epochs, setup included
(collation, geometry, validation passes); repetitions alternate A, B, A, B so slow drifts of
a shared machine hit both, and medians are compared.  Ours is the model ``build_model``
gives (the compiled tensor-product kernel where it builds, :mod:`searcher.models._compiled`),
timed a third time within ``pytorch_kernels()`` (the fused PyTorch fallback); the reference, ``scripts/reference_loop.py``, trains
the plain-e3nn build of it (``kernels="e3nn"``), loaded with the same state dict.

``flop_utilisation`` divides the multiply-adds of one training step (tensor-product paths
counted by :func:`searcher.models.count_madds`, forward + backward = 3 forward passes) by the
measured step time, and that rate by the measured rate of a dense float32 ``torch.mm`` at the
same thread count.
"""
from __future__ import annotations

import copy
import importlib.util
import statistics
import time
from functools import cache
from pathlib import Path

import torch

from searcher.models._compiled import kernel_status, pytorch_kernels

__all__ = ["loop_vs_reference", "flop_utilisation", "matmul_rate", "sized_config",
           "reference_module"]

ROOT = Path(__file__).resolve().parents[2]
NEVER = 1e30  # a divergence factor no finite loss reaches


@cache
def reference_module():
    """``scripts/reference_loop.py`` loaded as a module (scripts/ is not a package)."""
    path = ROOT / "scripts" / "reference_loop.py"
    spec = importlib.util.spec_from_file_location("searcher_reference_loop", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def sized_config(base: dict, family: str, lmax: int, epochs: int) -> dict:
    """``base`` with ``family``, hidden ``lmax`` (edge SH ``max(lmax, 2)``) and ``epochs``,
    a constant rate and no early end."""
    cfg = copy.deepcopy(base)
    cfg["model"]["family"] = family
    cfg["model"]["hidden"]["lmax"] = int(lmax)
    cfg["model"]["edge_attrs"]["lmax"] = max(int(lmax), 2)
    # No early end (divergence of an untrained model, time limit): both loops must run every
    # epoch, or the trainer would be timed on less work than the reference.
    cfg["training"].update(epochs=int(epochs), schedule="constant", warmup_epochs=0,
                           time_limit=0, diverge_factor=NEVER)
    return cfg


def _ours(model, dataset, cfg, init) -> float:
    from searcher.train import fit

    model.load_state_dict(init)
    start = time.perf_counter()
    result = fit(model, dataset, cfg)
    seconds = time.perf_counter() - start
    if result.epochs != int(cfg["training"]["epochs"]):
        raise RuntimeError(f"the timed run ended early: {result.reason}")
    return seconds


def _theirs(model, dataset, cfg, init) -> float:
    from searcher.train import fidelity_graphs

    train, val = fidelity_graphs(dataset, cfg)
    t = cfg["training"]
    model.load_state_dict(init)
    start = time.perf_counter()
    reference_module().train(model, train, val, dataset.target.name, epochs=int(t["epochs"]),
                             batch_size=int(t["batch_size"]),
                             learning_rate=float(t["learning_rate"]), clip=float(t["clip"]),
                             seed=int(t["seed"]))
    return time.perf_counter() - start


def loop_vs_reference(dataset, base: dict, *, sizes=(1, 2, 3), families=("steerable",),
                      epochs: int = 3, repeats: int = 3) -> list[dict]:
    """Reference time / our time per (family, lmax); > 1 means the trainer is faster.

    Args:
        dataset: a built dataset.
        base: a resolved config (its ``task`` built ``dataset``).
        sizes: hidden lmax values.
        families: model families.
        epochs: epochs per timed run.
        repeats: timed A/B pairs after one untimed warm-up pair.
    """
    from searcher.models import build_model

    rows = []
    for family in families:
        for lmax in sizes:
            cfg = sized_config(base, family, lmax, epochs)
            torch.manual_seed(int(cfg["training"]["seed"]))
            model = build_model(cfg["model"], dataset.fields, dataset.target.name,
                                stats=dataset.stats.get("graphs"))
            plain = build_model(cfg["model"], dataset.fields, dataset.target.name,
                                stats=dataset.stats.get("graphs"), kernels="e3nn")
            init = copy.deepcopy(model.state_dict())
            _ours(model, dataset, cfg, init)
            _theirs(plain, dataset, cfg, init)
            with pytorch_kernels():
                _ours(model, dataset, cfg, init)
            ours, theirs, fallback = [], [], []
            for _ in range(repeats):
                ours.append(_ours(model, dataset, cfg, init))
                theirs.append(_theirs(plain, dataset, cfg, init))
                with pytorch_kernels():
                    fallback.append(_ours(model, dataset, cfg, init))
            o, r = statistics.median(ours), statistics.median(theirs)
            f = statistics.median(fallback)
            rows.append({"family": family, "lmax": lmax, "epochs": epochs,
                         "kernel": kernel_status(), "ours_s": o, "reference_s": r,
                         "fallback_s": f, "ratio": r / o, "ratio_fallback": r / f,
                         "compiled_vs_fallback": f / o})
    return rows


def matmul_rate(n: int = 256, repeats: int = 20) -> float:
    """Measured multiply-adds per second of a dense float32 ``n x n`` matmul."""
    a, b = torch.randn(n, n), torch.randn(n, n)
    torch.mm(a, b)
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        torch.mm(a, b)
        times.append(time.perf_counter() - start)
    return n ** 3 / statistics.median(times)


def _step_seconds(model, batch, cfg: dict, target: str, steps: int) -> float:
    """Median seconds of one Adam training step of ``model`` on ``batch``."""
    from searcher.train import make_optimiser

    opt = make_optimiser(model, cfg["training"])
    times = []
    for k in range(steps + 1):
        start = time.perf_counter()
        opt.zero_grad(set_to_none=True)
        torch.mean((model(batch) - batch[target]) ** 2).backward()
        opt.step()
        if k:  # the first step allocates and is not timed
            times.append(time.perf_counter() - start)
    return statistics.median(times)


def flop_utilisation(dataset, base: dict, *, sizes=(1, 2, 3), family: str = "steerable",
                     steps: int = 10) -> list[dict]:
    """Counted multiply-adds per second of a training step over the dense matmul rate.

    The plain-e3nn build of each model (``kernels="e3nn"``, same weights, same batch) is
    timed in the same run, so ``fraction_e3nn`` shows what the fused kernels bought.
    """
    from searcher.models import build_model, count_madds
    from searcher.train import TrainBatches, fidelity_graphs

    rows = []
    target = dataset.target.name
    for lmax in sizes:
        cfg = sized_config(base, family, lmax, 1)
        torch.manual_seed(0)
        model = build_model(cfg["model"], dataset.fields, target,
                            stats=dataset.stats.get("graphs"))
        plain = build_model(cfg["model"], dataset.fields, target,
                            stats=dataset.stats.get("graphs"), kernels="e3nn")
        plain.load_state_dict(model.state_dict())
        train, _ = fidelity_graphs(dataset, cfg)
        batch = TrainBatches(model, train, int(cfg["training"]["batch_size"]),
                             torch.Generator().manual_seed(0)).batches[0]
        per_edge, per_node = count_madds(model)
        madds = 3 * (per_edge * batch.num_edges + per_node * batch.num_nodes)
        step_s = _step_seconds(model, batch, cfg, target, steps)
        plain_s = _step_seconds(plain, batch, cfg, target, steps)
        with pytorch_kernels():
            fallback_s = _step_seconds(model, batch, cfg, target, steps)
        dense = matmul_rate()
        rows.append({"family": family, "lmax": lmax, "kernel": kernel_status(),
                     "edges": batch.num_edges, "madds_per_step": madds,
                     "step_ms": step_s * 1e3, "step_ms_e3nn": plain_s * 1e3,
                     "step_ms_fallback": fallback_s * 1e3,
                     "madds_per_s": madds / step_s, "matmul_madds_per_s": dense,
                     "fraction": madds / step_s / dense,
                     "fraction_e3nn": madds / plain_s / dense,
                     "fraction_fallback": madds / fallback_s / dense})
    return rows
