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


def _line_study(tmp_path, cutoff) -> str:
    """12 nodes on a line, 1 apart, cut into 3 patches of 4 with one halo hop."""
    x = np.arange(12.0)
    path = tmp_path / "line.npz"
    np.savez(path, pos=np.stack([x, 0 * x, 0 * x], axis=1), velocity=np.ones((12, 3)),
             pressure=x, header=np.array(json.dumps(HEADER)))
    doc = {"study": {"name": "line"}, "task": {"source": str(path), "fields": HEADER,
                                               "graph": {"rule": "radius", "radius": 2.5},
                                               "split": {"hold_out": [], "stress": []},
                                               "patches": {"size": 4, "halo": 1}},
           "model": {"node_inputs": ["velocity"], "radial": {"cutoff": cutoff}}}
    study = tmp_path / f"line-{cutoff}.yaml"
    study.write_text(yaml.safe_dump(doc))
    return str(study)


def test_the_survey_counts_edges_longer_than_the_cutoff(tmp_path, capsys):
    # Derived by hand: bisection gives cores {0..3}, {4..7}, {8..11}; one halo hop at radius
    # 2.5 adds the nodes within 2.5, so the patches hold nodes 0..5, 2..9 and 6..11.  A run
    # of m nodes 1 apart has m-1 pairs at 1 and m-2 at 2 (both directions): 18 + 26 + 18 =
    # 62 edges, of which 8 + 12 + 8 = 28 are 2 long, over the cutoff 1.5.  Longest: 2.
    assert main(["data", "inspect", _line_study(tmp_path, 1.5), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["stats"]["patches"]["patches"] == 3
    assert report["stats"]["long_edges"] == {"cutoff": 1.5, "scale": "absolute",
                                             "edges_over": 28, "edges": 62, "longest": 2.0}
    assert report["stats"]["graphs"]["edge_len_max"] == 2.0
    assert any("28 of 62 edges are longer than model.radial.cutoff 1.5" in w
               for w in report["warnings"])
    # the in-memory build of the same patches, checked as `run` checks it, agrees
    from searcher.data import check_cutoff
    from searcher.spec import load_study
    study = load_study(_line_study(tmp_path, 1.5))
    with pytest.warns(UserWarning, match="28 of 62 edges"):
        assert check_cutoff(study, build_dataset(study.fixed()["task"]).graphs) == 28
    # the text report; a cutoff above every edge finds none and warns nothing
    assert main(["data", "inspect", _line_study(tmp_path, 1.5)]) == 0
    assert ("cutoff  28 of 62 edges longer than the least model.radial.cutoff 1.5 "
            "(longest 2)") in capsys.readouterr().out
    assert main(["data", "inspect", _line_study(tmp_path, 2.25), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["stats"]["long_edges"]["edges_over"] == 0 and not report["warnings"]


def test_the_survey_leaves_a_from_data_cutoff_unchecked(tmp_path, capsys):
    assert main(["data", "inspect", _line_study(tmp_path, "from_data")]) == 0
    assert "cutoff  not checked" in capsys.readouterr().out
    assert main(["data", "inspect", _line_study(tmp_path, "from_data"), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["stats"]["long_edges"] is None
