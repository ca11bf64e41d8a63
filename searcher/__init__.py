"""searcher."""
