"""The tiny study document the search, bench, fuzz and security tests write to disk."""
from __future__ import annotations

import copy

__all__ = ["tiny_study_doc", "tiny_fit_config"]

# 8 graphs of 10 probes, multiplicity 2, one layer, 4 epochs: a trial trains in well under a
# second on one CPU thread, so tests can run real searches.
_TINY = {
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


def _merge(base: dict, over: dict) -> dict:
    """Deep copy of ``base`` with ``over`` merged in: mappings merge, anything else replaces."""
    out = copy.deepcopy(base)
    for key, value in over.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = copy.deepcopy(value)
    return out


def tiny_study_doc(**overrides) -> dict:
    """A fresh tiny study document (a dict ready for ``yaml.safe_dump``).

    Args:
        **overrides: top-level sections merged into the document (mappings merge key
            by key, anything else replaces; e.g. ``search={"pruner": {"kind": "outlook"}}``).

    Example::

        doc = tiny_study_doc(output={"folder": "runs/tiny"})
        doc["training"]["epochs"]                              # 4
    """
    return _merge(_TINY, overrides)


def tiny_fit_config(*, seed: int = 3, epochs: int = 4) -> dict:
    """A resolved config (``defaults.yaml``) with the tiny study's fixed task, model and
    training sizes, for tests that call ``fit`` directly; ``seed`` seeds the demo data."""
    from searcher.spec import defaults

    cfg = defaults()
    for section in ("task", "model", "training"):
        fixed = {k: v for k, v in _TINY[section].items() if k != "learning_rate"}
        cfg[section] = _merge(cfg[section], fixed)
    cfg["task"]["demo"]["seed"] = int(seed)
    cfg["training"]["epochs"] = int(epochs)
    return cfg
