"""Strict JSON for analysis results: numpy scalars become numbers, NaN/inf become null."""
from __future__ import annotations

import json
import math

import numpy as np

__all__ = ["plain", "dumps"]


def plain(obj):
    """A copy of ``obj`` made of JSON types only."""
    if isinstance(obj, dict):
        return {str(k): plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return plain(obj.tolist())
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj) if math.isfinite(obj) else None
    if obj is None or isinstance(obj, str):
        return obj
    return str(obj)


def dumps(obj) -> str:
    """``json.dumps`` of :func:`plain` (``allow_nan=False``: always valid JSON)."""
    return json.dumps(plain(obj), indent=1, allow_nan=False)
