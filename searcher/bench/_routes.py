"""``kernel_routes``: the compiled C++ kernel against inductor (``torch.compile``) on demo sizes.

For the ``count`` largest distinct products of the demo's steerable model (hidden lmax 2), on
the demo batch's edge count, forward + backward of one product call is timed three ways in
one child process: the fused PyTorch path, the C++ kernel, and ``torch.compile`` of the fused
PyTorch path.  Inductor's first call per structure (its compile) is timed with an empty
inductor cache (``TORCHINDUCTOR_CACHE_DIR`` in a temporary folder), and again in a second
process that finds that cache warm: what a search pays for every new structure, against the
C++ kernel's one build per machine.
"""
from __future__ import annotations

import json
import subprocess
import sys
import tempfile

__all__ = ["kernel_routes"]

_CHILD = r"""
import json, statistics, sys, time, torch
torch.set_num_threads(1)
from e3nn import o3
from searcher.models._compiled import CompiledProduct, kernel_module
from searcher.models._fused import FusedProduct
spec = json.loads(sys.argv[1])
edges, count = spec["edges"], spec["count"]
products = [o3.FullyConnectedTensorProduct(a, b, c) for a, b, c in spec["structures"][:count]]
kernel = kernel_module()

def timed(f, n=30):
    f(); ts = []
    for _ in range(n):
        s = time.perf_counter(); f(); ts.append(time.perf_counter() - s)
    return statistics.median(ts)

rows = []
for tp in products:
    fp, cp = FusedProduct(tp), CompiledProduct(tp)
    gen = torch.Generator().manual_seed(0)
    x1 = torch.randn(edges, tp.irreps_in1.dim, generator=gen, requires_grad=True)
    x2 = torch.randn(edges, tp.irreps_in2.dim, generator=gen, requires_grad=True)
    w, g = tp.weight, torch.randn(edges, tp.irreps_out.dim, generator=gen)
    comp = torch.compile(lambda a, b, c, fp=fp: fp(a, b, c), dynamic=False)
    s = time.perf_counter()
    torch.autograd.backward(comp(x1, x2, w), g)
    first = time.perf_counter() - s
    row = {"structure": f"{tp.irreps_in1} x {tp.irreps_in2} -> {tp.irreps_out}",
           "inductor_first_call_s": first}
    row["fallback_us"] = timed(lambda: torch.autograd.backward(fp(x1, x2, w), g)) * 1e6
    if kernel is not None:
        row["compiled_us"] = timed(lambda: torch.autograd.backward(cp(kernel, x1, x2, w), g)) * 1e6
    row["inductor_us"] = timed(lambda: torch.autograd.backward(comp(x1, x2, w), g)) * 1e6
    rows.append(row)
print(json.dumps(rows))
"""


def _structures(dataset, base: dict) -> tuple[list[tuple[str, str, str]], int]:
    """The demo steerable model's shared fully connected products, and its batch's edges."""
    import torch

    from searcher.models import build_model
    from searcher.models._fused import fusable_paths
    from searcher.train import TrainBatches, fidelity_graphs

    from ._loop import sized_config

    cfg = sized_config(base, "steerable", 2, 1)
    model = build_model(cfg["model"], dataset.fields, dataset.target.name,
                        stats=dataset.stats.get("graphs"), kernels="e3nn")
    train, _ = fidelity_graphs(dataset, cfg)
    batch = TrainBatches(model, train, int(cfg["training"]["batch_size"]),
                         torch.Generator().manual_seed(0)).batches[0]
    out = []
    for module in model.modules():
        ins = getattr(module, "instructions", None)
        if (ins is None or not hasattr(module, "irreps_in2") or not fusable_paths(ins)
                or not module.shared_weights or type(module).__name__ !=
                "FullyConnectedTensorProduct"):
            continue
        key = (str(module.irreps_in1), str(module.irreps_in2), str(module.irreps_out))
        if key not in [k for _, k in out]:
            out.append((module.weight_numel, key))
    out.sort(key=lambda item: -item[0])   # the largest products first
    return [k for _, k in out], int(batch.num_edges)


def kernel_routes(dataset, base: dict, *, count: int = 2) -> dict:
    """Per structure: fwd+bwd microseconds of each route and inductor's first-call seconds,
    cold (empty inductor cache) and warm (a second process on that cache)."""
    from searcher.models._compiled import child_env

    structures, edges = _structures(dataset, base)
    spec = json.dumps({"edges": edges, "count": int(count), "structures": structures})
    with tempfile.TemporaryDirectory() as cache:
        env = child_env(TORCHINDUCTOR_CACHE_DIR=cache)
        runs = []
        for _ in range(2):
            proc = subprocess.run([sys.executable, "-c", _CHILD, spec], capture_output=True,
                                  text=True, env=env, timeout=1800, check=True)
            runs.append(json.loads(proc.stdout.strip().splitlines()[-1]))
    cold, warm = runs
    for row, again in zip(cold, warm):
        row["inductor_warm_first_call_s"] = again["inductor_first_call_s"]
    return {"edges": int(edges), "rows": cold}
