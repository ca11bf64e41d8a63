"""``kernel_cost``: what the compiled tensor-product kernel costs before it runs.

* the one build per machine, timed in a child process with an empty cache folder (so the
  figure is a cold build even where this machine's cache already holds one);
* loading the cached build in a fresh process (what every later worker pays once);
* per product structure, the tables (:class:`CompiledProduct`) of every distinct product in
  the demo models at the bench's lmax values: the only per-structure cost, since one build
  serves every structure.
"""
from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

__all__ = ["kernel_cost"]

_CHILD = """
import json, time
start = time.perf_counter()
from searcher.models._compiled import kernel_status
status = kernel_status()
print(json.dumps({"seconds": time.perf_counter() - start, "status": status}))
"""


def _child(cache: str) -> dict:
    from searcher.models._compiled import child_env

    env = child_env(SEARCHER_KERNEL_CACHE=cache)
    # Imports of torch/e3nn are inside the timed span of both runs alike; the import alone
    # is timed separately so the build's own share can be read off.
    proc = subprocess.run([sys.executable, "-c", _CHILD], capture_output=True, text=True,
                          env=env, timeout=1200, check=True)
    return json.loads(proc.stdout.strip().splitlines()[-1])


def _imports_s() -> float:
    proc = subprocess.run([sys.executable, "-c", "import time; s = time.perf_counter(); "
                           "import searcher.models; print(time.perf_counter() - s)"],
                          capture_output=True, text=True, check=True,
                          env={**os.environ, "OMP_NUM_THREADS": "1"})
    return float(proc.stdout.strip().splitlines()[-1])


def kernel_cost(dataset, base: dict, *, sizes=(1, 2, 3), families=("steerable", "gated"),
                cold_build: bool = True) -> dict:
    """Build, load and per-structure table costs of the compiled kernel (seconds)."""
    from searcher.models import build_model
    from searcher.models._compiled import CompiledProduct, kernel_status
    from searcher.models._fused import fusable_paths

    from ._loop import sized_config

    record = {"status": kernel_status(), "imports_s": _imports_s()}
    if cold_build:
        with tempfile.TemporaryDirectory() as folder:
            cold = _child(folder)
            warm = _child(folder)
        record.update(build_s=cold["seconds"], load_s=warm["seconds"],
                      child_status=cold["status"])
    seen, tables = set(), []
    for family in families:
        for lmax in sizes:
            cfg = sized_config(base, family, lmax, 1)
            model = build_model(cfg["model"], dataset.fields, dataset.target.name,
                                stats=dataset.stats.get("graphs"), kernels="e3nn")
            for module in model.modules():
                ins = getattr(module, "instructions", None)
                if ins is None or not hasattr(module, "irreps_in2"):
                    continue
                key = (str(module.irreps_in1), str(module.irreps_in2),
                       str(module.irreps_out), tuple(ins), bool(module.shared_weights))
                if key in seen or not fusable_paths(ins):
                    continue
                seen.add(key)
                start = time.perf_counter()
                CompiledProduct(module)
                tables.append(time.perf_counter() - start)
    record.update(structures=len(tables), tables_ms_median=statistics.median(tables) * 1e3,
                  tables_ms_max=max(tables) * 1e3)
    return record
