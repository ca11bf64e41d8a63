"""Samplers, pruners and seeds by name; Hyperband's brackets against Li et al. (2018)."""
from __future__ import annotations

import math

import optuna
import pytest

from searcher.errors import UserError
from searcher.search import PRUNERS, SAMPLERS, grid_space, make_pruner, make_sampler, sampler_seed
from searcher.spec import load_study

PRUNER_CFG = {"kind": "hyperband", "min_epochs": 1, "max_epochs": 81, "eta": 3,
              "percentile": 25.0, "warmup": 2, "margin": 0.05, "rank": 3, "headroom": 0.5}


def test_wrong_names_list_the_valid_ones(write_study):
    study = load_study(write_study())
    with pytest.raises(UserError) as err:
        make_pruner(dict(PRUNER_CFG, kind="bogus"))
    assert all(name in str(err.value) for name in PRUNERS)
    with pytest.raises(UserError) as err:
        make_sampler(study, {"kind": "annealing", "startup": 2, "candidates": 8,
                             "multivariate": True}, 0)
    assert all(name in str(err.value) for name in SAMPLERS)


def test_every_registered_name_builds(write_study):
    study = load_study(write_study())
    cfg = {"startup": 2, "candidates": 8, "multivariate": True}
    for kind in SAMPLERS:
        assert isinstance(make_sampler(study, dict(cfg, kind=kind), 0),
                          optuna.samplers.BaseSampler)
    for kind in PRUNERS:
        assert isinstance(make_pruner(dict(PRUNER_CFG, kind=kind, max_epochs=20)),
                          optuna.pruners.BasePruner)


def test_workers_get_distinct_repeatable_seeds():
    seeds = [sampler_seed(0, w) for w in range(4)]
    assert len(set(seeds)) == 4 and seeds == [sampler_seed(0, w) for w in range(4)]


def test_grid_space_enumerates_the_discrete_part(write_study):
    study = load_study(write_study({"model": {"layers": {"whole": [1, 3]}}}))
    space = grid_space(study)
    assert space["model.layers"] == [1, 2, 3]
    lo, mid, hi = space["training.learning_rate"]
    # log-spaced: the middle point is the geometric mean (common practice)
    assert mid == pytest.approx(math.sqrt(lo * hi)) and (lo, hi) == (0.0003, 0.03)


def _rung_epochs(pruner, trials: int = 150) -> set[tuple[int, ...]]:
    """Epochs at which each trial's successive-halving rungs were recorded."""
    # a fixed name: Optuna picks the bracket from a hash of study name and trial number
    study = optuna.create_study(study_name="hyperband-check", pruner=pruner,
                                sampler=optuna.samplers.RandomSampler(seed=0))
    seen = set()
    for _ in range(trials):
        trial = study.ask()
        rungs, done = [], 0
        for epoch in range(1, 82):
            trial.report(1.0 / epoch, epoch)
            if trial.should_prune():
                break
            n = sum(1 for k in study._storage.get_trial_system_attrs(trial._trial_id)
                    if k.startswith("completed_rung_"))
            if n > done:
                rungs.append(epoch)
                done = n
        study.tell(trial, 1.0)
        seen.add(tuple(rungs))
    return seen


def test_hyperband_brackets_match_li_et_al():
    pruner = make_pruner(PRUNER_CFG)
    seen = _rung_epochs(pruner)
    # Li et al., JMLR 18(185) 2018, R = 81, eta = 3: s_max = 4, five brackets whose first
    # rungs are r = 81 * 3^-s = 1, 3, 9, 27, 81 epochs; each then runs 3x longer up to 81.
    assert seen == {(1, 3, 9, 27, 81), (3, 9, 27, 81), (9, 27, 81), (27, 81), (81,)}
    # Optuna's HyperbandPruner: number of brackets = floor(log_eta(max/min)) + 1 = 5.
    assert pruner._n_brackets == 5
