"""``searcher check --gate``: K gated candidates, each with its cost beside the guard."""
from __future__ import annotations

import copy
import json

import yaml

from searcher.cli import main
from searcher.cli._gating import demo_stats, gate_samples
from searcher.spec import defaults
from searcher.testing import model_config, tiny_study_doc


def test_gate_samples_for_demo_config():
    cfg = copy.deepcopy(defaults())
    cfg["model"] = model_config({"hidden.multiplicity": 2, "layers": 1, "radial.count": 4})
    cfg["training"]["batch_size"] = 2
    bad = copy.deepcopy(defaults())
    bad["model"] = model_config({"hidden.lmax": 0, "edge_attrs.lmax": 1})  # 2e unreachable
    good, rejected = gate_samples(None, [cfg, bad])
    assert good["passed"] and good["equivariance_error"] < 1e-9
    assert good["madds_per_epoch"] > 0 and good["step_ms"] > 0 and good["within_guard"]
    # steps per epoch x epochs x step time (derived: one optimiser step per batch)
    steps = -(-demo_stats(cfg["task"])["graphs"] // 2)
    assert good["trial_seconds"] == good["step_ms"] * steps * cfg["training"]["epochs"] / 1e3
    assert not rejected["passed"] and "2e" in rejected["reason"]
    assert rejected["within_guard"] is None


def test_a_guard_below_the_candidate_is_reported():
    cfg = copy.deepcopy(defaults())
    cfg["model"] = model_config({"hidden.multiplicity": 2, "layers": 1, "radial.count": 4})
    cfg["training"]["batch_size"] = 2
    cfg["search"]["guard"]["max_params"] = 10
    (row,) = gate_samples(None, [cfg])
    assert row["passed"] and row["within_guard"] is False
    assert f"{row['params']:.4g} parameters exceed the guard of 10" in row["reason"]


def _tiny(tmp_path, **over):
    path = tmp_path / "g.yaml"
    path.write_text(yaml.safe_dump(tiny_study_doc(output={"folder": str(tmp_path / "o")},
                                                  **over), sort_keys=False))
    return path


def test_gate_k_gates_k_candidates(tmp_path, capsys):
    path = _tiny(tmp_path, search={"guard": {"max_params": 100000}})
    assert main(["check", str(path), "--gate", "4", "--samples", "2", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    gated = [row for row in out["samples"] if "gate" in row]
    assert len(out["samples"]) == 4 and len(gated) == 4
    assert all(row["gate"]["guard"]["max_params"] == 100000 for row in gated)
    assert main(["check", str(path), "--gate", "1"]) == 0
    text = capsys.readouterr().out
    assert "params / guard" in text and "/ 100000" in text and "step ms" in text


def test_check_refuses_a_missing_data_source(tmp_path, capsys):
    fields = {"velocity": {"kind": "vector", "role": "input"},
              "t": {"kind": "scalar", "role": "target"}}
    path = _tiny(tmp_path, task={"source": str(tmp_path / "nowhere"), "fields": fields,
                                 "split": {"hold_out": []}})
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "nowhere" in err and "does not exist" in err and f"{path}:" in err
    assert "[task.source]" in err
