"""``build_dataset``: samples → graphs, splits, stress sets, normaliser, hash, on-disk cache.

Functions take the ``task`` section of a resolved config (a plain dict with the keys of
``searcher/spec/defaults.yaml``).  The data hash covers the keys that shape the data (the
``fidelity`` subsection is left out: trials subsample at training time), the generator
version and, for file sources, the bytes of every file; equal hashes mean comparable data.
The cache is one NPZ file ``<cache_dir>/data-<hash>.npz`` holding every graph's arrays plus
a JSON record of splits, normaliser, stats and fields.
"""
from __future__ import annotations

import hashlib
import json
import os
import uuid
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from searcher.data._demo import DEMO_FIELDS, Sample, demo_samples
from searcher.data._files import data_files, declared_fields, read_samples
from searcher.data._graphs import build_edges, graph_stats, to_data
from searcher.data._kinds import Field
from searcher.data._normaliser import Normaliser
from searcher.data._patches import cut_samples, patch_census
from searcher.data._cases import check_hold_out, split_by_case
from searcher.data._splits import stress_sets
from searcher.errors import UserError

__all__ = ["Dataset", "GENERATOR_VERSION", "build_dataset", "data_hash", "describe_fields"]

# Bump whenever generated values or stored layout change, so old caches are not reused.
GENERATOR_VERSION = "flows-6"


def describe_fields(task_cfg: dict) -> dict[str, Field]:
    """Fields of the task without generating data (file sources read at most one header)."""
    if task_cfg["source"] == "demo":
        return {f.name: f for f in DEMO_FIELDS}
    return declared_fields(task_cfg)


def data_hash(task_cfg: dict) -> str:
    """sha256 of what shapes the data: see the module docstring."""
    keep = {k: v for k, v in task_cfg.items() if k != "fidelity"}
    if task_cfg["source"] == "demo":
        keep.pop("fields", None)
        keep.pop("mesh_edges", None)
        files = []
    else:
        keep.pop("demo", None)
        keep["source"] = ""   # the same files moved elsewhere are the same data
        files = [hashlib.sha256(p.read_bytes()).hexdigest() for p in data_files(task_cfg["source"])]
    text = json.dumps({"version": GENERATOR_VERSION, "task": keep, "files": files},
                      sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


@dataclass
class Dataset:
    """Graphs ready for training; see DEVELOPERS.md "Contracts/data".

    Attributes:
        fields: name → Field. ``inputs``: input fields; ``target``: the target field.
        graphs: ``torch_geometric.data.Data`` of every non-held-out sample, normalised.
        split: ``{"train", "val", "test"}`` → indices into ``graphs``.
        stress: stress-set name → list of Data (built from test samples / held-out families).
        normaliser: fitted on the train split.  hash: the data hash.  stats: counts.
        cache_dir: the folder it was cached in (None without a cache); later stages keep
            derived arrays there under names that start with the data hash's key.
    """

    fields: dict[str, Field]
    graphs: list
    split: dict[str, list[int]]
    stress: dict[str, list]
    normaliser: Normaliser
    hash: str
    stats: dict
    cache_dir: Path | None = None

    @property
    def inputs(self) -> list[Field]:
        return [f for f in self.fields.values() if f.role == "input"]

    @property
    def target(self) -> Field:
        return next(f for f in self.fields.values() if f.role == "target")


def _to_graph(task_cfg: dict, s: Sample, norm: Normaliser, counters: dict):
    graph = task_cfg["graph"]
    if s.edge_index is not None and (task_cfg.get("mesh_edges") or "core" in s.info):
        edges = s.edge_index   # mesh edges, or a patch's edges built when it was cut
    else:
        edges, dropped = build_edges(s.pos, graph["rule"], graph["radius"], graph["neighbours"],
                                     int(graph["edge_cap"]))
        counters["edges_dropped"] += dropped
    if edges.shape[1] == 0:
        where = s.source if s.source != "demo" else f"demo sample {s.sample} ({s.family})"
        raise UserError.single(
            f"graph of {where} has no edges at the chosen rule (rule={graph['rule']}, "
            f"radius={graph['radius']}, neighbours={graph['neighbours']}); raise task.graph.radius",
            file=s.source if s.source != "demo" else "", path="task.graph.radius")
    counters["edges_dropped"] += int(s.info.get("edges_dropped", 0))   # a patch's own cap
    counters["realizability_scaled"] += int(s.info.get("realizability_scaled", 0))
    values = {k: norm.apply(k, v) for k, v in s.fields.items()}
    data = to_data(s.pos, edges, values, s.family, s.sample)
    if "core" in s.info:
        import torch

        data.core = torch.as_tensor(s.info["core"])   # halo nodes: messages only
        # Where each node sits in its file, so a case can be put back together from the
        # core nodes of its patches (``searcher.train.reassemble``).
        data.node = torch.as_tensor(s.info["nodes"], dtype=torch.long)
        data.source = str(s.source)
    return data


def _build(task_cfg: dict, fields: dict[str, Field], digest: str) -> Dataset:
    if task_cfg["source"] == "demo":
        samples = demo_samples(task_cfg["demo"])
    else:
        samples = read_samples(task_cfg, fields)
    census = None
    if int((task_cfg.get("patches") or {}).get("size", 0)) > 0 and task_cfg["source"] != "demo":
        file_nodes = {s.source: len(s.pos) for s in samples}
        files = len(samples)
        samples = cut_samples(samples, task_cfg)
        census = dict(patch_census(samples, file_nodes), files=files,
                      size=int(task_cfg["patches"]["size"]),
                      halo=int(task_cfg["patches"].get("halo", 0)))
    hold = set(task_cfg["split"]["hold_out"])
    if task_cfg["source"] != "demo":
        check_hold_out(hold, {s.family for s in samples}, task_cfg["source"])
    kept = [s for s in samples if s.family not in hold]
    held = [s for s in samples if s.family in hold]
    if len(kept) < 3:
        source = task_cfg["source"]
        raise UserError.single(f"only {len(kept)} samples remain after hold_out (rule: at least "
                               "3, one each for train, val and test; a folder of files gives one "
                               "sample per file)", file="" if source == "demo" else str(source),
                               path="task.split.hold_out" if held else "task.source")
    split, split_by = split_by_case([s.family for s in kept], task_cfg["split"],
                                    task_cfg["source"])
    norm = Normaliser.fit({k: f.irreps for k, f in fields.items()},
                          {k: [kept[i].fields[k] for i in split["train"]] for k in fields})
    stress_samples, notes = stress_sets(task_cfg, fields, [kept[i] for i in split["test"]], held)
    counters = {"edges_dropped": 0, "realizability_scaled": 0}
    graphs = [_to_graph(task_cfg, s, norm, counters) for s in kept]
    stress = {k: [_to_graph(task_cfg, s, norm, counters) for s in v]
              for k, v in stress_samples.items()}
    stats = {"samples": len(samples), "graphs": graph_stats(graphs),
             "split": {k: len(v) for k, v in split.items()},
             "stress": {k: len(v) for k, v in stress.items()}, "stress_notes": notes,
             "families": sorted({s.family for s in kept}),
             "held_out": sorted({s.family for s in held}),
             "split_by": split_by, **({"patches": census} if census else {}), "cases": _case_parts(kept, split, held),
             **counters}
    return Dataset(fields, graphs, split, stress, norm, digest, stats)


def _case_parts(kept: list[Sample], split: dict, held: list[Sample]) -> dict[str, str]:
    """case → the part its samples are in (``a+b`` when split by sample puts it in several;
    ``unseen_family`` when held out)."""
    parts: dict[str, set] = {}
    for part, idx in split.items():
        for i in idx:
            parts.setdefault(kept[i].family, set()).add(part)
    out = {c: "+".join(p for p in ("train", "val", "test") if p in ps) for c, ps in parts.items()}
    out.update({s.family: "unseen_family" for s in held})
    return dict(sorted(out.items()))


def build_dataset(task_cfg: dict, cache_dir=None) -> Dataset:
    """Build (or load from ``cache_dir``) the dataset of a ``task`` section.

    Args:
        task_cfg: the resolved ``task`` mapping.
        cache_dir: folder for ``data-<hash>.npz``; None = no cache.
    """
    fields = describe_fields(task_cfg)
    digest = data_hash(task_cfg)
    path = Path(cache_dir) / f"data-{digest}.npz" if cache_dir else None
    if path is not None and path.exists():
        ds = _load_cache(path, fields, digest)
    else:
        ds = _build(task_cfg, fields, digest)
        if path is not None:
            _save_cache(path, ds)
    ds.cache_dir = path.parent if path is not None else None
    return ds


_ATTRS = ("pos", "edge_index", "edge_vec", "edge_len")
_PATCH = ("core", "node")   # a patch's core mask and its nodes' indices in the file


def _save_cache(path: Path, ds: Dataset) -> None:
    sets = {"graphs": ds.graphs, **{f"stress.{k}": v for k, v in ds.stress.items()}}
    arrays, labels = {}, {}
    for name, graphs in sets.items():
        labels[name] = [[g.family, g.sample, getattr(g, "source", None)] for g in graphs]
        for i, g in enumerate(graphs):
            for attr in _ATTRS + tuple(ds.fields) + (_PATCH if "core" in g else ()):
                arrays[f"{name}|{i}|{attr}"] = getattr(g, attr).numpy()
    meta = {"split": ds.split, "normaliser": ds.normaliser.to_dict(), "stats": ds.stats,
            "fields": {k: f.to_dict() for k, f in ds.fields.items()}, "labels": labels}
    path.parent.mkdir(parents=True, exist_ok=True)
    # Atomic: readers never see half a file.  The temporary name is this process's own, so
    # identical commands that build the same dataset at once (workers of one study on one
    # host) each finish their own copy; the last rename wins, and the contents are the same.
    tmp = path.with_name(f"{path.name}.{os.getpid()}-{uuid.uuid4().hex[:8]}.part.npz")
    try:
        np.savez(tmp, meta=np.array(json.dumps(meta)), **arrays)
        tmp.replace(path)
    finally:
        tmp.unlink(missing_ok=True)


def _load_cache(path: Path, fields: dict[str, Field], digest: str) -> Dataset:
    import torch
    from torch_geometric.data import Data

    with np.load(path, allow_pickle=False) as z:
        meta = json.loads(str(z["meta"]))
        stored = set(z.files)
        sets = {}
        for name, labels in meta["labels"].items():
            sets[name] = [Data(**{a: torch.as_tensor(z[f"{name}|{i}|{a}"])
                                  for a in _ATTRS + tuple(fields) + _PATCH
                                  if a not in _PATCH or f"{name}|{i}|{a}" in stored},
                               family=fam, sample=int(num),
                               **({"source": src} if src is not None else {}))
                          for i, (fam, num, src) in enumerate(labels)]
    stress = {k.split(".", 1)[1]: v for k, v in sets.items() if k.startswith("stress.")}
    return Dataset(fields, sets["graphs"], meta["split"], stress,
                   Normaliser.from_dict(meta["normaliser"]), digest, meta["stats"])
