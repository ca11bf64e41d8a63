"""Cases as families: sub-folders are cases, splits keep a case whole, hold_out names cases."""
from __future__ import annotations

import json

import numpy as np
import yaml

from searcher.cli import main
from searcher.data import build_dataset, data_cases

HEADER = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
          "stress": {"kind": "symmetric_tensor", "role": "target", "level": "node"}}


def _npz(path, seed, n=8):
    rng = np.random.default_rng(seed)
    s = rng.normal(size=(n, 3, 3))
    np.savez(path, pos=rng.uniform(size=(n, 3)), velocity=rng.normal(size=(n, 3)),
             stress=s + np.swapaxes(s, 1, 2), header=np.array(json.dumps(HEADER)))


def _cases(root):
    """Five sub-folder cases of two files each and one loose file (its own case)."""
    root.mkdir()
    seed = 0
    for case in ("hill", "duct", "bump", "step", "plate"):
        (root / case).mkdir()
        for k in range(2):
            _npz(root / case / f"part{k}.npz", seed)
            seed += 1
    _npz(root / "lone.npz", seed)
    return root


def _task(default_task, root, **split):
    task = json.loads(json.dumps(default_task))
    task["source"] = str(root)
    task["graph"]["radius"] = 5.0
    task["split"].update(stress=["unseen_family", "rotated"], **split)
    return task


def test_files_directly_in_the_folder_and_sub_folders_are_cases(tmp_path):
    got = [(p.relative_to(tmp_path).as_posix(), c) for p, c in data_cases(_cases(tmp_path / "d"))]
    assert got[0] == ("d/lone.npz", "lone")
    assert ("d/duct/part1.npz", "duct") in got and len(got) == 11


def test_held_out_case_is_in_no_split_and_only_in_unseen_family(tmp_path, default_task):
    ds = build_dataset(_task(default_task, _cases(tmp_path / "d"), hold_out=["duct"]))
    assert ds.stats["split_by"] == "case"
    for part, idx in ds.split.items():
        assert all(ds.graphs[i].family != "duct" for i in idx), part
    assert [g.family for g in ds.stress["unseen_family"]] == ["duct", "duct"]
    assert ds.stats["cases"]["duct"] == "unseen_family"
    # Every other case sits whole in one part.
    parts = {}
    for part, idx in ds.split.items():
        for i in idx:
            parts.setdefault(ds.graphs[i].family, set()).add(part)
    assert all(len(p) == 1 for p in parts.values()) and len(parts) == 5
    assert {c: p.pop() for c, p in parts.items()} == \
        {c: p for c, p in ds.stats["cases"].items() if c != "duct"}
    # The rotated stress set is built from test cases only.
    test_cases = {ds.graphs[i].family for i in ds.split["test"]}
    assert {g.family for g in ds.stress["rotated"]} == test_cases


def test_split_by_sample_may_share_a_case_between_parts(tmp_path, default_task):
    ds = build_dataset(_task(default_task, _cases(tmp_path / "d"), by="sample"))
    assert ds.stats["split_by"] == "sample"
    assert sum(len(v) for v in ds.split.values()) == 11
    assert any("+" in p for p in ds.stats["cases"].values())   # seed 0 splits some case


def test_inspect_shows_cases_and_unknown_hold_out_is_located(tmp_path, capsys):
    root = _cases(tmp_path / "d")
    doc = {"study": {"name": "cases"},
           "task": {"source": str(root), "graph": {"radius": 5.0}, "fields": HEADER,
                    "split": {"hold_out": ["hill"], "stress": ["unseen_family"]}},
           "model": {"node_inputs": ["velocity"]}}
    study = tmp_path / "s.yaml"
    study.write_text(yaml.safe_dump(doc))
    assert main(["data", "inspect", str(root), "--study", str(study)]) == 0
    out = capsys.readouterr().out
    assert "(by case)" in out and "hill: unseen_family" in out
    doc["task"]["split"]["hold_out"] = ["hills"]
    study.write_text(yaml.safe_dump(doc))
    assert main(["data", "inspect", str(root), "--study", str(study)]) == 2
    err = capsys.readouterr().err
    assert "task.split.hold_out" in err and "'hills'" in err and "hill" in err
