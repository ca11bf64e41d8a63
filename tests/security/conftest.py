"""The tiny study writer of the search tests (one definition, reused here)."""
from tests.search.conftest import write_study  # noqa: F401
