"""The dossier's per-case rows on patched data: test and held-out cases, each node once."""
from __future__ import annotations

import json

import numpy as np
import torch

from searcher.data import build_dataset
from searcher.models import build_model
from searcher.report._content import summarise_finalist
from searcher.report._finalist_measure import case_rows, headline_error
from searcher.report._plots import case_errors as case_plot
from searcher.testing import tiny_fit_config
from searcher.train import evaluate

HEADER = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
          "pressure": {"kind": "scalar", "role": "target", "level": "node"}}


def test_case_rows_hold_each_test_and_held_out_case_whole(tmp_path):
    for f in range(4):
        rng = np.random.default_rng(f)
        np.savez(tmp_path / f"c{f}.npz", pos=rng.uniform(size=(12, 3)),
                 velocity=rng.normal(size=(12, 3)), pressure=rng.normal(size=12),
                 header=np.array(json.dumps(HEADER)))
    cfg = tiny_fit_config()
    task = cfg["task"]
    task.update(source=str(tmp_path), fields={}, patches={"size": 4, "halo": 1})
    task["split"].update(by="case", hold_out=["c3"], stress=["unseen_family"])
    ds = build_dataset(task)
    torch.manual_seed(0)
    model = build_model(cfg["model"], ds.fields, ds.target.name, stats=ds.stats["graphs"])
    rows = case_rows(model, ds)
    (test_case,) = {ds.graphs[i].family for i in ds.split["test"]}
    assert rows.keys() == {test_case, "c3"}
    assert rows["c3"]["part"] == "unseen_family" and rows[test_case]["part"] == "test"
    # 3 patches of 4 core nodes each give back the file's 12 nodes once (derived)
    assert all(r["nodes"] == 12 and r["files"] == 1 for r in rows.values())
    # one test case: its row is the test error, which counts core nodes only
    test = [ds.graphs[i] for i in ds.split["test"]]
    assert abs(rows[test_case]["error"] - headline_error(evaluate(model, test, ds))) < 1e-9
    held = headline_error(evaluate(model, ds.stress["unseen_family"], ds))
    assert abs(rows["c3"]["error"] - held) < 1e-9
    # two seeds summed up; the section lists both cases, numbered as the figure numbers them
    fin = summarise_finalist({"label": "F1", "role": "finalist", "seeds": [
        {"seed": k, "error": 0.5, "best_value": 0.1, "cpu_seconds": 1.0,
         "inference_ms_per_1k_nodes": 1.0, "test": {}, "stress": {}, "cases": rows,
         "equivariance_error": 0.0} for k in (0, 1)]})
    assert fin["cases"]["c3"]["error"]["n"] == 2
    assert abs(fin["cases"]["c3"]["error"]["mean"] - held) < 1e-12
    content = {"finalists": [fin], "case_definition": "per case"}
    (table,) = [b for a, _, blocks in _only_cases(content) for b in blocks if b[0] == "table"]
    want = sorted([["c3", "unseen_family"], [test_case, "test"]])
    assert [r[:5] for r in table[2]] == [[str(k + 1), c, p, "12", "1"]
                                         for k, (c, p) in enumerate(want)]
    assert case_plot(content)[:8] == b"\x89PNG\r\n\x1a\n"


def _only_cases(content):
    from searcher.report._sections import BUILDERS

    return [("cases", "", BUILDERS["cases"](content))]
