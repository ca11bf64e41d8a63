"""Edge geometry of a dataset's graphs, computed once and kept on disk for later trials.

Positions are fixed, so a trial's edge spherical harmonics and radial bases depend only on
the graphs (data hash, graph and fidelity settings) and on the model's geometry settings
(:attr:`Geometry.key`: SH order, radial basis, cutoff, envelope) and dtype.  The first trial
with those settings computes them for all its edges in one call and writes
``<dataset.cache_dir>/geometry-<key>.pt``; every later trial that shares them, in any worker
on that folder, loads the file (and a worker keeps the last few in memory).  The graphs a
trial gets are shallow copies carrying ``edge_sh``, ``edge_rbf`` and ``edge_geometry``, which
collation concatenates and the model's geometry step then reuses (``Geometry.cached``).

Files are written to a temporary name and renamed, so concurrent workers never read half a
file; a file whose edge counts do not match the graphs (a stale or foreign file) is
recomputed and replaced.
"""
from __future__ import annotations

import copy
import hashlib
import json
import os
import pickle
import threading
import uuid
from collections import OrderedDict
from pathlib import Path

import torch

__all__ = ["with_geometry", "geometry_key"]

_KEPT = 8
_MEMORY: OrderedDict = OrderedDict()
_LOCK = threading.Lock()


def geometry_key(dataset, config: dict, geometry, dtype: torch.dtype, full: bool) -> str:
    """Hex key of everything the stored arrays depend on."""
    task = config["task"]
    text = json.dumps({"data": dataset.hash, "graph": task.get("graph"),
                       "fidelity": None if full else task.get("fidelity"),
                       "split_seed": task.get("split", {}).get("seed"),
                       "geometry": geometry.key, "dtype": str(dtype)},
                      sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()[:20]


def _compute(geometry, graphs: list, counts: list[int]) -> dict:
    with torch.no_grad():
        # Receivers offset per graph, as in a batch (model.radial.scale: local reads them).
        offsets = torch.cumsum(torch.tensor([0] + [g.num_nodes for g in graphs[:-1]]), 0)
        receivers = torch.cat([g.edge_index[1] + o for g, o in zip(graphs, offsets)])
        sh, rbf = geometry.compute(torch.cat([g.edge_vec for g in graphs]), receivers)
    return {"counts": counts, "edge_sh": sh.contiguous(), "edge_rbf": rbf.contiguous()}


def _load(path: Path, counts: list[int]) -> dict | None:
    try:
        stored = torch.load(path, weights_only=True)
    except (OSError, RuntimeError, EOFError, ValueError, pickle.UnpicklingError):
        return None
    if not isinstance(stored, dict) or stored.get("counts") != counts:
        return None
    return stored


def _save(path: Path, arrays: dict) -> None:
    tmp = path.with_name(f".{path.name}.{uuid.uuid4().hex}.tmp")
    try:
        torch.save(arrays, tmp)
        os.replace(tmp, path)
    except OSError:  # a read-only or full cache folder costs only the reuse
        tmp.unlink(missing_ok=True)


def with_geometry(model: torch.nn.Module, dataset, config: dict, graphs: list, *,
                  full: bool = False) -> list:
    """``graphs`` as shallow copies carrying the model's stored edge geometry.

    Args:
        model: the model to train (graphs are returned unchanged when it has no
            ``geometry``, e.g. the baselines).
        dataset: the dataset the graphs come from (its ``hash`` and ``cache_dir``).
        config: the resolved config (``task.graph``, ``task.fidelity``, ``task.split``).
        graphs: the trial's graphs, in a fixed order (train then validation).
        full: the graphs were taken at full fidelity.
    """
    geometry = getattr(model, "geometry", None)
    if geometry is None or not graphs:
        return graphs
    if any(b.device.type != "cpu" for b in geometry.buffers()):
        return graphs  # the graphs live on the CPU; an accelerator run computes per batch
    dtype = graphs[0].edge_vec.dtype
    key = geometry_key(dataset, config, geometry, dtype, full)
    counts = [int(g.edge_vec.shape[0]) for g in graphs]
    with _LOCK:
        arrays = _MEMORY.get(key)
        if arrays is not None:
            _MEMORY.move_to_end(key)
    if arrays is None or arrays["counts"] != counts:
        folder = getattr(dataset, "cache_dir", None)
        path = Path(folder) / f"geometry-{key}.pt" if folder is not None else None
        arrays = _load(path, counts) if path is not None and path.exists() else None
        if arrays is None:
            arrays = _compute(geometry, graphs, counts)
            if path is not None:
                _save(path, arrays)
        with _LOCK:
            _MEMORY[key] = arrays
            while len(_MEMORY) > _KEPT:
                _MEMORY.popitem(last=False)
    out, start = [], 0
    for g, n in zip(graphs, counts):
        g = copy.copy(g)
        g.edge_sh = arrays["edge_sh"][start:start + n]
        g.edge_rbf = arrays["edge_rbf"][start:start + n]
        g.edge_geometry = geometry.key
        out.append(g)
        start += n
    return out
