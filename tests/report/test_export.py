"""The exported choice: a valid fixed study, weights that reload and reproduce predictions."""
from __future__ import annotations

from pathlib import Path

import torch

import searcher
from searcher.cli import main
from searcher.spec import load_study


def test_choice_yaml_is_a_fixed_study_that_check_accepts(dossier):
    _, content = dossier
    path = Path(content["folder"]) / content["files"]["config"]
    chosen = load_study(path)
    assert chosen.dimensions == []
    assert main(["check", str(path)]) == 0
    pick = next(f for f in content["finalists"] if f["label"] == content["pick"]["label"])
    assert chosen.fixed()["model"] == pick["config"]["model"]
    assert chosen.fixed()["training"]["seed"] == content["pick"]["seed"]
    assert "validated against experiments" in path.read_text()


def test_weights_reload_and_match_a_retrain_from_the_yaml(dossier):
    from searcher.search import train_config
    from searcher.train import collate

    _, content = dossier
    folder = Path(content["folder"])
    model = searcher.load_model(folder / content["files"]["weights"])
    assert model.normaliser is not None and not model.training
    # Re-train from the exported file alone: same seed, same data, same weights (CPU, 1 thread).
    study = load_study(folder / content["files"]["config"])
    cfg = study.fixed()
    cfg["training"]["device"] = "cpu"
    again, _, dataset = train_config(study, cfg, seed=cfg["training"]["seed"],
                                     full_fidelity=True)
    again.eval()
    graphs = [dataset.graphs[i] for i in dataset.split["test"]]
    with torch.no_grad():
        for a, b in zip(collate(model, graphs, 8), collate(again, graphs, 8)):
            # Determinism rule (same seed, same data, one torch thread): bit for bit.
            assert torch.equal(model(a), again(b))
    state = torch.load(folder / content["files"]["weights"], weights_only=True)
    assert set(state) == set(model.state_dict())
