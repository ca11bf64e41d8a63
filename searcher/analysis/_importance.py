"""Parameter importance in two senses, computed by Optuna's evaluators.

* "reaching the top": PED-ANOVA (Watanabe, Bansal & Hutter, IJCAI 2023) at the good group's
  quantile - which parameters separate the best trials from the rest;
* "global variance": fANOVA (Hutter, Hoos & Leyton-Brown, ICML 2014) - which parameters
  explain the spread of the loss over the whole space.

Both read a fresh in-memory study holding one complete trial per finished record whose best
value is finite (pruned trials count with what they reached).  Conditional parameters are
scored over the trials where they are active, together with the always-present ones.
"""
from __future__ import annotations

import math
import warnings

import numpy as np
import optuna
from optuna.importance import (FanovaImportanceEvaluator, PedAnovaImportanceEvaluator,
                               get_param_importances)

from searcher.analysis._records import TrialRecord

__all__ = ["importances"]

_MAX_TRIALS = 1000   # fANOVA's forest grows with the trial count; a sample ranks as well


def _store(records: list[TrialRecord]) -> optuna.Study:
    study = optuna.create_study(direction="minimize")
    for rec in records:
        study.add_trial(optuna.trial.create_trial(
            value=rec.best_value, params=rec.params, distributions=rec.distributions))
    return study


def _scores(records, params, evaluator) -> dict[str, float]:
    varying = [p for p in params
               if len({repr(r.params[p]) for r in records}) > 1]
    if len(records) < 4 or not varying:
        return {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")   # both evaluators are flagged experimental
        return get_param_importances(_store(records), evaluator=evaluator, params=varying)


def importances(records: list[TrialRecord], top_quantile: float) -> dict:
    """Two importance rankings plus notes.

    Args:
        records: finished trials.
        top_quantile: share of trials that counts as "the top" (the good group's share).

    Returns:
        ``{"reaching_top": {param: share}, "global_variance": {param: share},
        "top_quantile": q, "conditional": {param: trials active}, "note": str}``.
    """
    usable = [r for r in records if math.isfinite(r.best_value) and r.params]
    if len(usable) > _MAX_TRIALS:
        pick = np.random.default_rng(0).choice(len(usable), _MAX_TRIALS, replace=False)
        usable = [usable[i] for i in sorted(pick)]
    q = float(min(max(top_quantile, 0.02), 0.5))
    out = {"reaching_top": {}, "global_variance": {}, "top_quantile": q, "conditional": {},
           "note": ""}
    if len(usable) < 8:
        out["note"] = f"importance needs at least 8 trials with a loss; found {len(usable)}"
        return out
    names = sorted({p for r in usable for p in r.params})
    common = [p for p in names if all(p in r.params for r in usable)]
    evaluators = {"reaching_top": lambda: PedAnovaImportanceEvaluator(target_quantile=q),
                  "global_variance": lambda: FanovaImportanceEvaluator(n_trees=32, seed=0)}
    for key, make in evaluators.items():
        out[key] = dict(_scores(usable, common, make()))
    for name in names:
        if name in common:
            continue
        subset = [r for r in usable if name in r.params]
        out["conditional"][name] = len(subset)
        if len(subset) < 8:
            continue
        for key, make in evaluators.items():
            score = _scores(subset, common + [name], make()).get(name)
            if score is not None:
                out[key][name] = score
    for key in evaluators:
        out[key] = dict(sorted(out[key].items(), key=lambda kv: -kv[1]))
    return out
