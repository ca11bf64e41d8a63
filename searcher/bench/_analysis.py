"""Benchmark: analysing a large synthetic study (called by ``scripts/bench``)."""
from __future__ import annotations

import logging
import tempfile
import time

import optuna

from searcher.analysis import analyze
from searcher.testing._planted import planted_study

__all__ = ["bench_analysis_10k"]


def bench_analysis_10k(n: int = 10_000, seed: int = 0) -> float:
    """Seconds to :func:`analyze` an in-memory study of ``n`` synthetic trials (1% deep),
    plots and JSON included; building the study is not timed.  Goal: <= 30 s at 10,000."""
    optuna.logging.set_verbosity(logging.WARNING)
    store, _ = planted_study(n=n, rare=max(3, n // 100), seed=seed, name="bench")
    with tempfile.TemporaryDirectory() as tmp:
        start = time.perf_counter()
        analyze(None, store, tmp)
        return time.perf_counter() - start
