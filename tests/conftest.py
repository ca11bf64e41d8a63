"""Suite-wide settings: one torch thread, fixed seeds, no network, temp MLflow homes."""
from __future__ import annotations

import os
import random

import numpy as np
import pytest

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("MLFLOW_ENABLE_ASYNC_LOGGING", "false")
os.environ.setdefault("GIT_PYTHON_REFRESH", "quiet")


@pytest.fixture(autouse=True)
def _seeded():
    """Every test starts from the same seeds and one torch thread (determinism rule)."""
    import torch

    torch.set_num_threads(1)
    torch.manual_seed(0)
    np.random.seed(0)
    random.seed(0)
    yield


@pytest.fixture(scope="session")
def pg_server():
    """URL of a real PostgreSQL server (tests/pg_server.py: the CI one, or a private one)."""
    from tests.pg_server import shared_server

    yield from shared_server()


@pytest.fixture
def pg_url(pg_server):
    """URL of an empty database of its own on that server, dropped after the test."""
    from tests.pg_server import drop_database, fresh_database

    url = fresh_database(pg_server)
    yield url
    drop_database(pg_server, url)
