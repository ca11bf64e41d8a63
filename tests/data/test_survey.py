"""The patch survey of ``data inspect``: one patch at a time, same figures as the full build."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
import yaml

from searcher.cli import main
from searcher.data import build_dataset, survey_dataset
from searcher.data._demo import Sample
from searcher.data._patches import PatchCensus, iter_cut
from searcher.spec import defaults

HEADER = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
          "pressure": {"kind": "scalar", "role": "target", "level": "node"}}
NODES, SIZE = 20_000, 1_500


def _task(tmp_path) -> dict:
    rng = np.random.default_rng(0)
    path = tmp_path / "big.npz"
    np.savez(path, pos=rng.uniform(size=(NODES, 3)), velocity=rng.normal(size=(NODES, 3)),
             pressure=rng.normal(size=NODES), header=np.array(json.dumps(HEADER)))
    task = defaults()["task"]
    task.update(source=str(path), fields={})
    task["graph"].update(rule="neighbours", neighbours=6)
    task["split"].update(hold_out=[], stress=[])
    task["patches"] = {"size": SIZE, "halo": 1}
    return task


@pytest.mark.slow
def test_the_survey_covers_every_node_once_and_matches_the_full_build(tmp_path):
    task = _task(tmp_path)
    digest, stats = survey_dataset(task)
    p = stats["patches"]
    # bisection into ceil(N / size) pieces: each half gets round(n * left / count) <= left *
    # size nodes, so no piece is split again (derived from the rule in _patches.bisect)
    assert p["patches"] == math.ceil(NODES / SIZE) == 14
    assert p["core_cover_exact"] and p["core_nodes_max"] <= SIZE and p["halo_nodes_mean"] > 0
    # independently of the census: the cores' global node numbers are 0..N-1, once each
    from searcher.data import describe_fields, read_samples
    samples = read_samples(task, describe_fields(task))
    cores = np.concatenate([s.info["nodes"][s.info["core"]] for s in iter_cut(samples, task)])
    np.testing.assert_array_equal(np.sort(cores), np.arange(NODES))
    # the full in-memory build reports the same figures
    ds = build_dataset(task)
    assert digest == ds.hash and stats["patches"] == ds.stats["patches"]
    assert stats["graphs"] == pytest.approx(ds.stats["graphs"], rel=1e-12)
    assert stats["split"] == ds.stats["split"] and stats["cases"] == ds.stats["cases"]


def test_the_census_notices_a_node_covered_twice():
    pos = np.random.default_rng(1).uniform(size=(10, 3))
    task = {"patches": {"size": 4, "halo": 0}, "graph": {"rule": "neighbours", "radius": 1,
                                                         "neighbours": 2, "edge_cap": 0}}
    pieces = list(iter_cut([Sample(pos, {}, "c", 0, "f.npz")], task))
    census = PatchCensus({"f.npz": 10})
    for piece in pieces:
        census.add(piece)
    assert census.result()["core_cover_exact"] and census.result()["patches"] == 3
    census.add(pieces[0])                            # the same core twice
    assert not census.result()["core_cover_exact"]


def test_inspect_reports_patches_and_cover(tmp_path, capsys):
    task = _task(tmp_path)
    small = tmp_path / "small.npz"
    with np.load(task["source"]) as z:           # 400 nodes, 4 patches of 100
        np.savez(small, **{k: (z[k][:400] if k != "header" else z[k]) for k in z.files})
    doc = {"study": {"name": "p"}, "task": {"source": str(small), "fields": HEADER,
                                            "graph": {"rule": "neighbours", "neighbours": 6},
                                            "split": {"hold_out": [], "stress": []},
                                            "patches": {"size": 100, "halo": 1}},
           "model": {"node_inputs": ["velocity"]}}
    path = tmp_path / "p.yaml"
    path.write_text(yaml.safe_dump(doc))
    assert main(["data", "inspect", str(path)]) == 0
    out = capsys.readouterr().out
    assert "patches 4 from 1 file(s), 1 cut" in out and "core exactly once: yes" in out
    assert "stress sets are made when the study runs" in out
