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


def test_finalists_from_good_group_and_a_fixed_control(study_file):
    study = load_study(study_file)
    records = [_record(0, "steerable", 0.3, 0.003, study=study),
               _record(1, "steerable", 0.1, 0.01, study=study),
               _record(2, "steerable", 0.2, 0.01, outcome="pruned", study=study),
               _record(3, "steerable", 0.05, 0.003, outcome="failed", study=study)]
    good = {"good_group": {"label": "good", "trials": [0, 2]}}
    cands, notes = choose_finalists(study, records, good, 3)
    # Good group only, ordered by best value; trial 1 (same config as 2) is not in it.
    assert [c.trial for c in cands if c.role == "finalist"] == [2, 0]
    control = cands[-1]
    assert control.role == "control" and control.trial is None
    assert control.config["model"]["family"] == "coord_mlp"
    # the fair control keeps the first finalist's inputs and depth (issue: a fair control)
    first = next(c for c in cands if c.label == "F1")
    assert control.config["model"]["node_inputs"] == first.config["model"]["node_inputs"]
    assert control.config["model"]["layers"] == first.config["model"]["layers"]
    cands, notes = choose_finalists(study, records, None, 1)
    assert [c.trial for c in cands] == [1, None] and any("No good group" in n for n in notes)
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
