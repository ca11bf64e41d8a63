"""``patches``: time and peak memory of cutting and surveying one large file.

For each size a uniform random cloud is written as one NPZ file (a vector input, a scalar
target) and ``survey_dataset`` (what ``searcher data inspect`` runs on patched data) cuts it
into patches of ``PATCH`` nodes with ``HALO`` hop of halo under the 6-neighbour rule.  Each
measurement runs in a fresh process, whose peak resident memory (``ru_maxrss``) and wall
time are reported, beside a process that only imports the same modules (the floor every
command pays, mostly torch).  At the largest size the full in-memory ``build_dataset`` of
the same file runs too, side by side, so the ratio says what holding one patch at a time
saves (at small sizes both sit on the import floor), and so does one epoch of training on
it (``fit`` at full fidelity, a tiny gated model, :data:`TRAIN_BATCH` patches a batch): the
bound of training on patched data, which holds every patch graph of the training split and
its cached edge geometry in memory, besides one batch's activations.
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

__all__ = ["bench_patches", "PATCH", "HALO", "TRAIN_BATCH"]

PATCH, HALO, NEIGHBOURS = 5_000, 1, 6
TRAIN_BATCH = 4
_FIELDS = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
           "pressure": {"kind": "scalar", "role": "target", "level": "node"}}


def _task(path: Path) -> dict:
    from searcher.spec import defaults

    task = defaults()["task"]
    task.update(source=str(path), fields=_FIELDS)
    task["graph"].update(rule="neighbours", neighbours=NEIGHBOURS)
    task["split"].update(hold_out=[], stress=[])
    task["patches"] = {"size": PATCH, "halo": HALO}
    return task


def _child(mode: str, path: str) -> None:
    """Run in the measured process: ``survey``, ``build``, ``train`` or ``imports`` only."""
    import resource
    import time
    import warnings

    from searcher.data import build_dataset, survey_dataset
    from searcher.models import build_model
    from searcher.testing import tiny_fit_config
    from searcher.train import fit

    task = _task(Path(path))
    start = time.perf_counter()
    out = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        if mode == "survey":
            _, stats = survey_dataset(task)
            out = {"patches": stats["patches"]["patches"],
                   "core_cover_exact": stats["patches"]["core_cover_exact"],
                   "edges": round(stats["graphs"]["edges_mean"] * stats["graphs"]["graphs"])}
        elif mode == "build":
            stats = build_dataset(task).stats
            out = {"patches": stats["patches"]["patches"],
                   "core_cover_exact": stats["patches"]["core_cover_exact"]}
        elif mode == "train":
            cfg = tiny_fit_config(epochs=1)
            cfg["task"] = task
            cfg["training"]["batch_size"] = TRAIN_BATCH
            ds = build_dataset(task)
            model = build_model(cfg["model"], ds.fields, ds.target.name,
                                stats=ds.stats["graphs"])
            result = fit(model, ds, cfg, full_fidelity=True)
            train = [ds.graphs[i] for i in ds.split["train"]]
            out = {"status": result.status, "train_patches": len(train),
                   "train_nodes": sum(g.num_nodes for g in train),
                   "train_edges": sum(int(g.edge_index.shape[1]) for g in train)}
    out.update(seconds=time.perf_counter() - start,
               peak_mib=resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
    print(json.dumps(out))


def _measure(mode: str, path: Path) -> dict:
    root = Path(__file__).resolve().parents[2]
    env = dict(os.environ, OMP_NUM_THREADS="1",
               PYTHONPATH=os.pathsep.join(filter(None, [str(root),
                                                        os.environ.get("PYTHONPATH")])))
    code = f"from searcher.bench._patches import _child; _child({mode!r}, {str(path)!r})"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          env=env, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def _write(path: Path, n: int, seed: int = 0) -> None:
    rng = np.random.default_rng(seed)
    np.savez(path, pos=rng.uniform(size=(n, 3)) * (n / 1e5) ** (1 / 3),
             velocity=rng.normal(size=(n, 3)), pressure=rng.normal(size=n),
             header=np.array(json.dumps(_FIELDS)))


def bench_patches(sizes=(100_000, 300_000), compare_at: int | None = None) -> dict:
    """Survey time and peak memory per node count (see the module docstring).

    Args:
        sizes: node counts, one file each.
        compare_at: the size at which the full ``build_dataset`` and one epoch of training
            run beside the survey (default the largest).

    Returns:
        ``{"floor_mib", "rows": [{nodes, patches, edges, core_cover_exact, seconds,
        peak_mib}], "build": {nodes, seconds, peak_mib, ratio_peak, ratio_seconds},
        "train": {nodes, status, train_patches, train_nodes, train_edges, seconds,
        peak_mib, above_floor_mib, ratio_peak}}``.
    """
    compare_at = max(sizes) if compare_at is None else compare_at
    out = {"patch": PATCH, "halo": HALO, "neighbours": NEIGHBOURS, "rows": []}
    with tempfile.TemporaryDirectory() as tmp:
        out["floor_mib"] = _measure("imports", Path(tmp) / "none.npz")["peak_mib"]
        for n in sizes:
            path = Path(tmp) / f"cloud-{n}.npz"
            _write(path, n)
            row = {"nodes": n, **_measure("survey", path)}
            row["above_floor_mib"] = row["peak_mib"] - out["floor_mib"]
            out["rows"].append(row)
            if n == compare_at:
                full = _measure("build", path)
                out["build"] = {"nodes": n, "seconds": full["seconds"],
                                "peak_mib": full["peak_mib"],
                                "above_floor_mib": full["peak_mib"] - out["floor_mib"],
                                "ratio_peak": full["peak_mib"] / row["peak_mib"],
                                "ratio_seconds": full["seconds"] / row["seconds"]}
                trained = _measure("train", path)
                out["train"] = {"nodes": n, **trained,
                                "above_floor_mib": trained["peak_mib"] - out["floor_mib"],
                                "ratio_peak": trained["peak_mib"] / row["peak_mib"]}
            path.unlink()
    out["peak_gib"] = max(r["peak_mib"] for r in out["rows"]) / 1024
    return out
