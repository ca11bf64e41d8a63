"""Speed benchmarks behind ``scripts/bench``: every figure a ratio measured in one run.

Figures: ``loop_vs_reference`` (the trainer against ``scripts/reference_loop.py``),
``flop_utilisation``, ``worker_scaling``, ``overhead``, ``analysis_10k`` and the pruner
replay of ``searcher.bench._pruners``.  A top-level consumer, like ``searcher.cli``.
"""
from searcher.bench._analysis import bench_analysis_10k
from searcher.bench._loop import (flop_utilisation, loop_vs_reference, matmul_rate,
                                  reference_module, sized_config)
from searcher.bench._pruners import (TRUTH_DIR, bench_pruners, crossing_pairs,
                                     format_bench_pruners, truth_curves)
from searcher.bench._suite import GOALS, PLANS, format_table, machine, main, run_bench
from searcher.bench._sweep import fixed_params, overhead, sweep_study, worker_scaling

__all__ = ["GOALS", "PLANS", "TRUTH_DIR", "bench_analysis_10k", "bench_pruners", "crossing_pairs",
           "fixed_params",
           "format_bench_pruners", "truth_curves", "flop_utilisation", "format_table",
           "loop_vs_reference", "machine", "main", "matmul_rate", "overhead",
           "reference_module", "run_bench", "sized_config", "sweep_study", "worker_scaling"]
