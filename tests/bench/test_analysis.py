"""The analysis benchmark runs (timing goals live in scripts/bench, not in tests)."""
from searcher.bench import bench_analysis_10k


def test_bench_runs_on_a_small_study():
    seconds = bench_analysis_10k(200)
    assert seconds > 0
