"""Weights on disk: ``torch.save`` of a state dict, read back with ``weights_only=True``.

Writes go to a temporary file first and are renamed into place, so a reader (or a worker
killed mid-write) never sees a half-written checkpoint.
"""
from __future__ import annotations

import os
from pathlib import Path

import torch

__all__ = ["save_weights", "load_weights"]


def save_weights(state: dict, path: str | Path) -> Path:
    """Write a state dict to ``path`` atomically; returns the path."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    torch.save(state, tmp)
    os.replace(tmp, path)
    return path


def load_weights(path: str | Path) -> dict:
    """Read a state dict written by :func:`save_weights` (tensors only, no pickled code)."""
    return torch.load(Path(path), map_location="cpu", weights_only=True)
