"""searcher: architecture searches for E(3)-equivariant graph networks on physics fields.

``import searcher`` stays light; :func:`load_model` (from :mod:`searcher.report`) and the
torch stack behind it are imported on first use.
"""
from __future__ import annotations

__all__ = ["load_model"]


def __getattr__(name: str):
    # PEP 562 lazy attribute: the report layer pulls in torch, e3nn and matplotlib.
    if name == "load_model":
        from searcher.report import load_model

        return load_model
    raise AttributeError(f"module 'searcher' has no attribute {name!r}")
