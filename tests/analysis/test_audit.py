"""Prune audit: stratified choice and classification of re-run curves."""
from __future__ import annotations

from collections import Counter

import numpy as np
import optuna
import pytest

from searcher.analysis import choose_for_audit, classify_reruns, prune_audit, read_trials
from searcher.testing._planted import add_trial


def _store(cuts):
    store = optuna.create_study()
    for cut in cuts:
        add_trial(store, 0.5 * np.arange(1, cut + 1) ** -0.5, {"model.hidden.lmax": 1},
                  "pruned")
    add_trial(store, 0.5 * np.arange(1, 19) ** -0.5, {"model.hidden.lmax": 1}, "completed")
    return store


def test_stratified_by_pruning_epoch():
    records = read_trials(_store([2] * 12 + [6] * 6 + [12] * 2))
    chosen = choose_for_audit(records, 10)
    # Proportional shares 6 / 3 / 1 (common practice: proportional stratified sampling).
    assert Counter(r.pruned_at for r in chosen) == {2: 6, 6: 3, 12: 1}
    assert all(r.outcome == "pruned" for r in chosen)
    assert [r.number for r in chosen] == sorted(r.number for r in chosen)
    # Every stratum gets one while n allows; never more than there are pruned trials.
    assert Counter(r.pruned_at for r in choose_for_audit(records, 3)) == {2: 1, 6: 1, 12: 1}
    assert len(choose_for_audit(records, 100)) == 20  # derived: 12 + 6 + 2 pruned trials
    assert choose_for_audit(records, 10) == chosen   # deterministic with the seed


def test_classification_with_wilson_interval():
    curves = [np.array([1.0, 0.01]), np.array([1.0, 0.5]), np.array([0.02, 0.004]),
              np.array([np.nan, np.inf])]
    res = classify_reruns(curves, threshold=0.01)
    # derived: curves 1 and 3 reach 0.01 or below; the non-finite one counts as not joined
    assert res["joined"] == 2 and res["reruns"] == 4 and res["fraction"] == 0.5
    # Wilson (1927) score interval, 2 of 4 at 95 % (z = 1.959964), by hand: centre 0.5,
    # half-width z/(1+z²/4)·sqrt(1/16 + z²/64) = 0.349961
    assert res["interval"] == pytest.approx([0.150039, 0.849961], abs=1e-6)
    assert res["joined_each"] == [True, False, True, False]


def test_audit_needs_a_good_group():
    store = _store([2, 6])
    res = prune_audit(None, store, {"good_group": None}, 2)
    # derived: _store([2, 6]) holds pruned trials 0 and 1, then one completed
    assert res["status"] == "nothing_to_audit" and res["chosen"] == [0, 1]
    assert "no distinct good group" in res["message"]


TINY = """study:
  name: tiny
task:
  demo: {{samples: 8, probes: 12, families: [abc, strain]}}
  split: {{hold_out: [], stress: []}}
model:
  hidden: {{multiplicity: 2}}
  layers: 1
  width: 8
training:
  epochs: 2
search:
  pruner: {{kind: none, max_epochs: 2}}
output:
  folder: {out}
"""


def test_audit_reruns_through_the_search_layer(tmp_path):
    from searcher.spec import load_study

    path = tmp_path / "tiny.yaml"
    path.write_text(TINY.format(out=tmp_path / "out"))
    study = load_study(path)
    store = optuna.create_study()
    for _ in range(2):
        add_trial(store, [5.0], {"model.hidden.lmax": 1}, "pruned", config=study.fixed())
    res = prune_audit(study, store, {"good_group": {"label": "converges deep",
                                                    "threshold": 4.0}}, 1)
    # derived: --audit 1 asks for one re-run of the two pruned trials
    assert res["status"] == "done" and res["reruns"] == 1 and len(res["chosen"]) == 1
    assert np.isfinite(res["best"][0])
    assert res["joined_each"] == [res["best"][0] <= 4.0]
    # Wilson (1927) at n = 1, by hand: 0 of 1 -> [0, z²/(1+z²)] = [0, 0.793451];
    # 1 of 1 -> [1/(1+z²), 1] = [0.206549, 1] (z = 1.959964)
    assert res["interval"] == pytest.approx([0.0, 0.793451] if res["joined"] == 0
                                            else [0.206549, 1.0], abs=1e-6)
