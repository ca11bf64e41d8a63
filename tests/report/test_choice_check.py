"""The exported choice.yaml is a study that ``searcher check`` accepts, whatever the dossier's
re-training length."""
from __future__ import annotations

import pytest
import yaml

from searcher.cli import main
from searcher.report._export import export_choice
from searcher.spec import load_study
from searcher.testing import tiny_study_doc


@pytest.mark.parametrize("kind", ["outlook", "hyperband"])
def test_a_short_dossier_exports_a_study_that_checks(tmp_path, kind):
    doc = tiny_study_doc(training={"epochs": 12},
                         search={"pruner": {"kind": kind, "min_epochs": 4, "max_epochs": 12}})
    path = tmp_path / "long.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    config = load_study(path).sample(1, seed=0)[0]
    config["training"]["epochs"] = 3                    # as `dossier --epochs 3` re-trains
    yaml_path, _ = export_choice(tmp_path / "dossier", config, {}, name="long-choice",
                                 summary="chosen", normaliser={})
    assert main(["check", str(yaml_path), "--samples", "1"]) == 0
    fixed = load_study(yaml_path).fixed()
    assert fixed["training"] == config["training"] and fixed["model"] == config["model"]
    assert fixed["search"]["pruner"]["max_epochs"] == 3
