"""The patches figure on a small file: every number is produced (no timing is asserted),
the survey, the full build and one epoch of training side by side."""
from __future__ import annotations

import math

import pytest

from searcher.bench import format_table
from searcher.bench._patches import PATCH, bench_patches
from searcher.bench._suite import GOALS, machine


@pytest.mark.slow
def test_patches_figure_reports_cover_memory_and_the_side_by_side_build():
    value = bench_patches((12_000,))
    (row,) = value["rows"]
    # ceil(N / size) pieces by the bisection rule (derived, see tests/data/test_survey.py)
    assert row["patches"] == math.ceil(12_000 / PATCH) == 3 and row["core_cover_exact"]
    assert row["peak_mib"] >= value["floor_mib"] > 0   # a peak includes the imports
    assert value["build"]["nodes"] == 12_000 and value["build"]["ratio_peak"] > 0
    train = value["train"]
    assert train["status"] == "completed" and train["peak_mib"] >= value["floor_mib"]
    assert 0 < train["train_patches"] <= row["patches"] and train["train_edges"] > 0
    table = format_table({"figures": {"patches": value}, "machine": machine(), "mode": "quick"})
    assert "patches" in table and "cover exact" in table and "patches" in GOALS
    assert "one epoch of training at 1e+04 (completed" in table
