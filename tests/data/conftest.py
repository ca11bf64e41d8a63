"""Shared fixtures for the data tests: the embedded default ``task`` section, shrunk."""
from __future__ import annotations

import copy
import importlib.resources

import pytest
import yaml


@pytest.fixture(scope="session")
def default_task() -> dict:
    text = importlib.resources.files("searcher.spec").joinpath("defaults.yaml").read_text()
    return yaml.safe_load(text)["task"]


@pytest.fixture
def small_task(default_task) -> dict:
    """12 samples of 14 probes (≤ 16 nodes), radius wide enough that no node is isolated."""
    task = copy.deepcopy(default_task)
    task["demo"].update(samples=12, probes=14, seed=3)
    task["graph"]["radius"] = 1.6
    return task
