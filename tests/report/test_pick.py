"""Choosing finalists from trial records and the pick's decision rule."""
from __future__ import annotations

import math

import numpy as np
import pytest

from searcher.analysis import TrialRecord
from searcher.errors import UserError
from searcher.report import choose_finalists, decide, summarise_finalist
from searcher.spec import load_study


def _record(number, family, value, lr, outcome="completed", study=None):
    cfg = study.fixed()
    cfg["model"]["family"] = family
    cfg["training"]["learning_rate"] = lr
    return TrialRecord(number=number, outcome=outcome, curve=np.array([value * 2, value]),
                       best_value=value, params={}, config=cfg)


def test_fair_control_keeps_the_picks_task_and_matches_its_size(study_file):
    from searcher.models import build_model
    from searcher.report._finalists import fair_control, tensor_basis_reference
    from searcher.testing import make_fields

    study = load_study(study_file)
    fields = make_fields()
    pick = choose_finalists(study, [_record(0, "steerable", 0.1, 0.01, study=study)], None, 1)[0][0]
    pick.config["model"]["node_inputs"] = ["scaled_strain", "scaled_vorticity"]
    target = build_model(pick.config["model"], fields, "anisotropy")
    params = sum(p.numel() for p in target.parameters())
    control = fair_control(pick, params, fields, "anisotropy", None, ["rotated"])
    model = control.config["model"]
    assert control.role == "control" and control.trial is None
    assert model["family"] == "coord_mlp" and model["augment"] == "rotate"  # no "reflected" set
    assert model["node_inputs"] == ["scaled_strain", "scaled_vorticity"]
    assert model["layers"] == pick.config["model"]["layers"]

    def count(width):
        cfg = {**model, "width": width}
        return sum(p.numel() for p in build_model(cfg, fields, "anisotropy").parameters())

    # Nearest by enumeration of the neighbouring widths (the count grows with the width).
    got = count(model["width"])
    assert all(abs(got - params) <= abs(count(w) - params)
               for w in (model["width"] - 1, model["width"] + 1) if w >= 1)
    assert "against" in control.origin and f"{got:,}" in control.origin
    assert fair_control(pick, params, fields, "anisotropy", None,
                        ["reflected"]).config["model"]["augment"] == "rotate_reflect"
    ref = tensor_basis_reference(pick, fields)
    assert ref.config["model"]["family"] == "tensor_basis" and ref.role == "reference"
    vec = make_fields({"velocity": ("vector", "input", "node"),
                       "anisotropy": ("traceless_symmetric_tensor", "target", "node")})
    assert tensor_basis_reference(pick, vec) is None


def test_finalists_from_the_good_group(study_file):
    study = load_study(study_file)
    records = [_record(0, "steerable", 0.3, 0.003, study=study),
               _record(1, "steerable", 0.1, 0.01, study=study),
               _record(2, "steerable", 0.2, 0.01, outcome="pruned", study=study),
               _record(3, "steerable", 0.05, 0.003, outcome="failed", study=study)]
    good = {"good_group": {"label": "good", "trials": [0, 2]}}
    cands, notes = choose_finalists(study, records, good, 3)
    # Good group only, ordered by best value; trial 1 (same config as 2) is not in it.
    assert [c.trial for c in cands] == [2, 0] and {c.role for c in cands} == {"finalist"}
    cands, notes = choose_finalists(study, records, None, 1)
    assert [c.trial for c in cands] == [1] and any("No good group" in n for n in notes)
    with pytest.raises(UserError):
        choose_finalists(study, records[3:], None, 2)


def _finalist(label, errors, params, role="finalist", equivariant=True):
    seeds = [{"seed": i, "status": "completed", "error": e, "best_value": e,
              "cpu_seconds": 1.0, "inference_ms_per_1k_nodes": 1.0, "test": {"2e": e},
              "stress": {"rotated": {"error": e, "ratio": 1.0}},
              "equivariance_error": 1e-12, "gate_passed": True} for i, e in enumerate(errors)]
    return summarise_finalist({"label": label, "role": role, "origin": "trial", "seeds": seeds,
                               "config": {"model": {"family": "steerable"}},
                               "equivariant": equivariant, "cost": {"params": params}})


def test_clear_win_picks_the_more_accurate():
    a = _finalist("F1", [0.10, 0.11, 0.12, 0.10, 0.11, 0.10, 0.12, 0.11], 900)
    b = _finalist("F2", [0.20, 0.21, 0.22, 0.20, 0.21, 0.20, 0.22, 0.21], 100)
    pick, duel = decide([b, a])
    # Bouthillier et al. 2021 rule (memory): lower bound > 0.5 and P > 0.75 → A better.
    assert duel.p == 1.0 and duel.conclusion == "a" and pick["label"] == "F1"


def test_tie_picks_the_smaller_model():
    a = _finalist("F1", [0.10, 0.30, 0.10, 0.30, 0.10, 0.30], 900)
    b = _finalist("F2", [0.20, 0.20, 0.20, 0.20, 0.20, 0.20], 100)
    pick, duel = decide([a, b])
    # Hand: F1 wins 3 of 6 paired seeds, P = 0.5: tied (Bouthillier et al. 2021, memory)
    assert duel.conclusion == "tied" and pick["label"] == "F2"
    assert any("smaller model" in r for r in pick["reasons"])


def test_control_never_wins_while_a_finalist_is_usable():
    fin = _finalist("F1", [0.3, 0.3], 900)
    ctl = _finalist("C", [0.1, 0.1], 100, role="control", equivariant=False)
    pick, _ = decide([fin, ctl])
    assert pick["label"] == "F1"
    assert any("control" in r for r in pick["reasons"])
    assert not math.isnan(fin["metrics"]["error"]["mean"])


def _against_learned(pick_errors, ref_errors):
    from searcher.report._pick import judge_against_baselines
    from searcher.report._references import learned_row

    fin = _finalist("F1", pick_errors, 900)
    ref = _finalist("T", ref_errors, 700)
    ref["config"] = {"model": {"family": "tensor_basis"}}
    fin["skill"] = {"tensor-basis network": 1 - fin["metrics"]["error"]["mean"]
                    / learned_row(ref)["test_error"]}
    pick, _ = decide([fin])
    judge_against_baselines(pick, [fin], [learned_row(ref)], [ref])
    return pick


def test_learned_reference_is_beaten_only_by_a_paired_verdict():
    # 6 of 6 paired seeds won: exact Clopper-Pearson lower bound 0.025^(1/6) = 0.541 > 0.5
    # (derived), so the pick beats the tensor-basis network (Bouthillier et al. 2021 rule).
    pick = _against_learned([0.10] * 6, [0.20] * 6)
    assert pick["beats_baselines"] is True
    (duel,) = pick["against_learned"]
    assert duel["conclusion"] == "a" and duel["p"] == 1.0 and duel["low"] > 0.5
    assert duel["low"] == pytest.approx(0.025 ** (1 / 6))


def test_a_lower_mean_over_too_few_seeds_is_not_a_win():
    # A far lower mean on 3 seeds: the skill score is positive, yet no paired verdict (fewer
    # than 5 seeds), so the recommendation stays provisional and beats_baselines is False.
    pick = _against_learned([0.10] * 3, [0.20] * 3)
    assert pick["beats_baselines"] is False
    assert pick["against_learned"][0]["conclusion"] == "undecided"
    assert "Provisionally" in pick["decision"]


def test_a_learned_reference_that_wins_withdraws_the_pick():
    # One big loss drags the mean over, but seed by seed the reference wins 5 of 6 (and the
    # reverse case): the verdict follows the seeds, not the means.
    pick = _against_learned([0.30, 0.30, 0.30, 0.30, 0.30, 0.01],
                            [0.20, 0.20, 0.20, 0.20, 0.20, 0.20])
    assert pick["against_learned"][0]["conclusion"] in ("b", "undecided")
    assert pick["beats_baselines"] is False
    lost = _against_learned([0.30] * 6, [0.20] * 6)
    assert lost["against_learned"][0]["conclusion"] == "b"
    assert lost["decision"].startswith("Do not carry F1 forward")


def test_a_tie_with_a_learned_reference_is_provisional_and_shows_the_spreads():
    # 3 wins of 6 (P = 0.5, within the tie band of Bouthillier et al. 2021): not a win, not a
    # loss; the reasons give both seed ranges, the reference's failed seed counted.
    pick = _against_learned([0.07, 0.08, 0.07, 0.08, 0.07, 0.07],
                            [0.14, 0.06, 0.08, 0.05, 0.19, 0.05])
    assert pick["against_learned"][0]["conclusion"] == "tied"
    assert pick["beats_baselines"] is False and "Provisionally" in pick["decision"]
    assert any("0.07–0.08" in r and "0.05–0.19" in r for r in pick["reasons"])
