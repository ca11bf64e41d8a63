"""The dossier of a real (tiny) searched study: content, files and MLflow child runs.

Sources of the numeric checks: the zero predictor's relative L2 of 1 and the skill score
1 − error / reference error are derived from their definitions; the 5-seed floor of a verdict
is the dossier's own rule (README); the Pareto flags are re-derived by brute force from the
definition of dominance; the float64 gate bound 1e-9 is the gate's stated tolerance.
"""
from __future__ import annotations

import json
from pathlib import Path

from searcher.report import BASELINES, RERUN_ROLE, SECTION_TITLES

STRESS = {"rotated", "reflected", "translated", "unseen_family", "denser", "sparser"}


def test_json_holds_the_contracted_keys(dossier):
    study, content = dossier
    folder = Path(content["folder"])
    saved = json.loads((folder / "dossier.json").read_text())
    for key in ("finalists", "p_a_beats_b", "pick", "files", "cautions", "provenance"):
        assert key in saved
    for fin in saved["finalists"]:
        assert {"config", "seeds", "metrics", "stress", "equivariance_error"} <= set(fin)
        assert [s["seed"] for s in fin["seeds"]] == [0, 1]
        assert set(fin["stress"]) == STRESS
        assert fin["cost"]["params"] > 0 and fin["metrics"]["cpu_seconds"]["mean"] >= 0
    assert saved["finalists"][-1]["role"] == "control"
    assert saved["finalists"][-1]["config"]["model"]["family"] in BASELINES
    assert saved["pick"]["label"] in {f["label"] for f in saved["finalists"]}
    assert saved["pick"]["reasons"] and saved["pick"]["would_change"]


def test_every_test_and_held_out_node_is_in_one_case_row(dossier):
    from searcher.data import build_dataset

    study, content = dossier
    ds = build_dataset(study.fixed()["task"])
    test = [ds.graphs[i] for i in ds.split["test"]]
    held = ds.stress["unseen_family"]
    for fin in content["finalists"]:
        for s in fin["seeds"]:
            rows = s["cases"]
            # each case's nodes counted once: the parts' node totals are the graphs' (derived)
            assert sum(r["nodes"] for r in rows.values() if r["part"] == "test") == \
                sum(g.num_nodes for g in test)
            assert {c for c, r in rows.items() if r["part"] == "unseen_family"} == {"sphere"}
            assert rows["sphere"]["nodes"] == sum(g.num_nodes for g in held)
            assert all(r["error"] > 0 for r in rows.values())
        assert set(fin["cases"]) == set(fin["seeds"][0]["cases"])
        assert fin["cases"]["sphere"]["error"]["n"] == len(fin["seeds"])
    md = (Path(content["folder"]) / "dossier.md").read_text()
    assert "## Case by case" in md and "put back together from its patches' core nodes" in md


def test_baselines_skill_and_verdicts_are_consistent(dossier):
    _, content = dossier
    names = [b["name"] for b in content["baselines"]]
    assert names[:2] == ["zero", "training mean"] and "eddy viscosity" in names
    for b in content["baselines"]:
        assert b["test_error"] > 0 and set(b["stress"]) == STRESS
    # derived: predicting zero has relative L2 error exactly 1 on every set
    zero = content["baselines"][0]
    assert abs(zero["test_error"] - 1.0) < 1e-9
    assert all(abs(v - 1.0) < 1e-9 for v in zero["stress"].values())
    for fin in content["finalists"]:
        for b in content["baselines"]:
            expect = 1 - fin["metrics"]["error"]["mean"] / b["test_error"]
            assert abs(fin["skill"][b["name"]] - expect) < 1e-12
    chosen = next(f for f in content["finalists"] if f["label"] == content["pick"]["label"])
    beats = all(v > 0 for v in chosen["skill"].values())
    assert content["pick"]["beats_baselines"] is beats
    if not beats:
        assert content["pick"]["decision"].startswith("Do not carry")
    duel = content["p_a_beats_b"]
    # two seeds in the test dossier: below the 5 a verdict needs
    assert duel is None or (duel["n"] < 5 and duel["conclusion"] == "undecided")
    assert content["fidelity_transfer"]["too_thin"]
    picked = next(f for f in content["finalists"] if f["label"] == content["pick"]["label"])
    assert content["control"]["config"]["model"]["node_inputs"] == \
        picked["config"]["model"]["node_inputs"]


def test_the_control_is_matched_to_the_pick_and_trained_on_random_frames(dossier):
    _, content = dossier
    picked = next(f for f in content["finalists"] if f["label"] == content["pick"]["label"])
    control = next(f for f in content["finalists"] if f["role"] == "control")
    mine, theirs = control["config"]["model"], picked["config"]["model"]
    assert mine["family"] == "coord_mlp" and mine["augment"] == "rotate_reflect"  # "reflected" is tested
    for key in ("node_inputs", "layers", "aggregate", "activation"):
        assert mine[key] == theirs[key]
    assert control["config"]["training"] == picked["config"]["training"]
    # Parameter counts as near as the width allows: one width step changes the count by
    # more than the remaining gap (derived from the bisection in matched_width).
    assert abs(control["cost"]["params"] - picked["cost"]["params"]) <= \
        0.5 * picked["cost"]["params"]
    assert content["control"]["params"] == control["cost"]["params"]


def test_tensor_basis_reference_is_retrained_and_scored(dossier):
    _, content = dossier
    (ref,) = content["references"]
    assert ref["config"]["model"]["family"] == "tensor_basis"
    assert ref["config"]["model"]["node_inputs"] == ["scaled_strain", "scaled_vorticity"]
    assert [s["seed"] for s in ref["seeds"]] == [0, 1]
    row = next(b for b in content["baselines"] if b["kind"] == "learned")
    errors = [s["error"] for s in ref["seeds"]]
    assert abs(row["test_error"] - sum(errors) / len(errors)) < 1e-12
    assert ref["equivariance_error"] < 1e-9        # the gate's float64 bound
    assert all(row["name"] in f["skill"] for f in content["finalists"])


def test_cost_front_flags_exactly_the_undominated_points(dossier):
    _, content = dossier
    front = content["cost_front"]
    labels = {p.get("label") for p in front if p["group"] == "dossier"}
    assert labels == {f["label"] for f in content["finalists"]} | {"T"}
    assert any(p["group"] == "search" for p in front)
    axes = ("error", "ms_per_1000_nodes", "madds")
    for group in ("dossier", "search"):
        pts = [p for p in front if p["group"] == group]
        assert any(p["pareto"] for p in pts)
        for p in pts:   # brute force, the definition of Pareto dominance
            dominated = any(all(q[k] <= p[k] for k in axes) and any(q[k] < p[k] for k in axes)
                            for q in pts if q is not p)
            assert p["pareto"] is (not dominated)


def test_every_written_file_exists(dossier):
    _, content = dossier
    folder = Path(content["folder"])
    for key, name in content["files"].items():
        for rel in name if isinstance(name, list) else [name]:
            assert (folder / rel).is_file(), (key, rel)
    md = (folder / "dossier.md").read_text()
    # Same sections, same order, in Markdown as in HTML.
    positions = [md.index(f"## {title}") for title in SECTION_TITLES.values()]
    assert positions == sorted(positions)


def test_cautions_and_provenance(dossier):
    study, content = dossier
    text = " ".join(content["cautions"])
    assert "validated against experiments or trusted simulations" in text
    assert "local codes and licensed engineering practice prevail" in text.lower()
    prov = content["provenance"]
    assert prov["study_hash"] == study.hash and len(prov["data_hash"]) >= 16
    assert prov["packages"]["torch"].startswith("2.") and prov["host"]


def test_reruns_are_child_runs_of_the_study(dossier):
    from mlflow import MlflowClient

    from searcher.search import prepare_tracking

    study, content = dossier
    info = prepare_tracking(study, study.fixed(), study.output_dir)
    client = MlflowClient(tracking_uri=info.uri)
    exp = client.get_experiment_by_name(study.name)
    parent = client.search_runs([exp.experiment_id],
                                filter_string="tags.`searcher.role` = 'study'")[0]
    reruns = client.search_runs([exp.experiment_id],
                                filter_string=f"tags.`searcher.role` = '{RERUN_ROLE}'")
    expected = sum(len(f["seeds"]) for f in content["finalists"] + content["references"])
    assert len(reruns) == expected
    assert {r.data.tags["mlflow.parentRunId"] for r in reruns} == {parent.info.run_id}
    ids = {s["mlflow_run_id"] for f in content["finalists"] + content["references"]
           for s in f["seeds"]}
    assert ids == {r.info.run_id for r in reruns}
    assert all("test_error" in r.data.metrics for r in reruns)
