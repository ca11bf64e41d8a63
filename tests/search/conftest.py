"""Tiny studies written to tmp_path: 8 graphs of 10 probes, multiplicity 2, 3-4 epochs."""
from __future__ import annotations

import copy
from pathlib import Path

import pytest
import yaml

BASE = {
    "study": {"name": "tiny"},
    "task": {"source": "demo", "demo": {"samples": 8, "probes": 10, "seed": 3},
             "graph": {"rule": "neighbours", "neighbours": 4},
             "split": {"fractions": [0.5, 0.25, 0.25], "hold_out": [], "stress": []}},
    "model": {"family": "gated", "hidden": {"lmax": 1, "multiplicity": 2}, "layers": 1,
              "radial": {"count": 4}, "width": 8, "node_inputs": ["velocity"]},
    "training": {"epochs": 4, "batch_size": 2,
                 "learning_rate": {"real": [0.0003, 0.03], "log": True}},
    "search": {"sampler": {"kind": "tpe", "startup": 2},
               "pruner": {"kind": "none", "min_epochs": 1, "max_epochs": 4, "eta": 2,
                          "warmup": 1},
               "budget": {"trials": 3}, "workers": 1},
}


def merge(base: dict, over: dict) -> dict:
    out = copy.deepcopy(base)
    for key, value in over.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = merge(out[key], value)
        else:
            out[key] = value
    return out


@pytest.fixture
def write_study(tmp_path: Path):
    """``write_study(overrides, name=...) -> path`` of a tiny study with its own output."""
    def write(over: dict | None = None, name: str = "tiny") -> Path:
        doc = merge(BASE, over or {})
        doc["study"]["name"] = name
        doc["output"] = {"folder": str(tmp_path / name)}
        path = tmp_path / f"{name}.yaml"
        path.write_text(yaml.safe_dump(doc, sort_keys=False))
        return path
    return write
