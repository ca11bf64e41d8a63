"""Tiny studies written to tmp_path: 8 graphs of 10 probes, multiplicity 2, 3-4 epochs."""
from __future__ import annotations

from pathlib import Path

import pytest
import yaml

from searcher.testing import tiny_study_doc


@pytest.fixture
def write_study(tmp_path: Path):
    """``write_study(overrides, name=...) -> path`` of a tiny study with its own output."""
    def write(over: dict | None = None, name: str = "tiny") -> Path:
        doc = tiny_study_doc(**{**(over or {}), "study": {"name": name},
                                "output": {"folder": str(tmp_path / name)}})
        path = tmp_path / f"{name}.yaml"
        path.write_text(yaml.safe_dump(doc, sort_keys=False))
        return path
    return write
