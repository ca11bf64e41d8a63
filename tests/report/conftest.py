"""One tiny real study, searched and then put through the dossier once per test session.

The search space holds an equivariant family and a baseline, and two learning rates, so the
dossier has finalists to compare and a control taken from a trial.  The summary and team
carry hostile markup: the writers must show it as text.
"""
from __future__ import annotations

import json
import warnings
from pathlib import Path

import pytest

HOSTILE_SUMMARY = "<script>window.__hostile_ran=1</script> & <b>bold</b>"
HOSTILE_TEAM = "<img src=x onerror=window.__hostile_ran=2>"

TINY_STUDY = f"""\
study:
  name: tiny-dossier
  summary: {json.dumps(HOSTILE_SUMMARY)}
  team: {json.dumps(HOSTILE_TEAM)}
task:
  demo: {{samples: 12, probes: 16, seed: 1}}
  graph: {{radius: 1.2}}
  split: {{fractions: [0.5, 0.25, 0.25], hold_out: [sphere]}}
model:
  family: {{one_of: [steerable, coord_mlp]}}
  hidden: {{multiplicity: 2, lmax: 1}}
  radial: {{count: 4, cutoff: 1.2}}
  layers: 1
  width: 8
training:
  learning_rate: {{one_of: [0.003, 0.01]}}
  epochs: 2
  batch_size: 4
search:
  sampler: {{kind: random}}
  budget: {{trials: 5}}
  pruner: {{kind: none, max_epochs: 2}}
  workers: 1
"""


@pytest.fixture(scope="session")
def study_file(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("dossier-study")
    path = folder / "tiny.yaml"
    out = json.dumps(str(folder / "out"))
    path.write_text(TINY_STUDY + f"output:\n  folder: {out}\n", encoding="utf-8")
    return path


@pytest.fixture(scope="session")
def dossier(study_file):
    """``(study, content)`` of a searched tiny study and its dossier (2 finalists + control,
    2 seeds, 2 epochs)."""
    import torch

    from searcher.report import make_dossier
    from searcher.search import run_study
    from searcher.spec import load_study

    torch.set_num_threads(1)
    study = load_study(study_file)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        run_study(study, workers=1, live=False, echo=lambda *a, **k: None)
        content = make_dossier(study, finalists=2, seeds=2, epochs=2)
    return study, content
