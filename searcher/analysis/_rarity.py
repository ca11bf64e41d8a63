"""How rare the good group is, said two ways that answer different questions.

* **Share of the trials**: good trials over the trials whose place is known (finished, or cut
  and placed by a forecast).  A model-based sampler (TPE, GP, CMA-ES) spends more trials
  where it already found good ones, so this share overstates how common the good region is.
* **Share of the space**: what a configuration drawn at random from the study's space would
  hit.  Two estimates: the good share among the trials that were drawn at random (the
  sampler's start-up trials, or every trial of a random sampler), and a model estimate: a
  depth-3 decision tree of "good" over the trials' parameters, averaged over draws from the
  space itself (a covariate-shift correction: the tree is fitted where the sampler looked,
  and read where a random draw would land).

Intervals are exact (Clopper–Pearson, via ``scipy.stats.binomtest``).  Below
:data:`MIN_RANDOM` placed random trials the random estimate is reported as too thin.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.stats import binomtest
from sklearn.tree import DecisionTreeClassifier

from searcher.analysis._traits import param_kinds

__all__ = ["rarity", "random_drawn", "MIN_RANDOM", "SPACE_DRAWS"]

MIN_RANDOM = 5
SPACE_DRAWS = 400
_CONFIDENCE = 0.95


def _share(good: int, total: int) -> dict:
    ci = binomtest(good, total).proportion_ci(_CONFIDENCE, method="exact")
    return {"share": good / total, "good": int(good), "of": int(total),
            "interval": [float(ci.low), float(ci.high)]}


def random_drawn(record) -> bool:
    """Whether the trial's configuration was drawn at random (from its stored sampler)."""
    sampler = (record.config.get("search") or {}).get("sampler") or {}
    if sampler.get("kind") in ("random", "qmc"):
        return True
    # The first `startup` trial numbers started before `startup` trials had finished, so
    # every model-based sampler drew them at random.
    return record.number < int(sampler.get("startup", 0) or 0)


def _columns(records, kinds):
    cols = []
    for name, kind in kinds.items():
        if kind == "choice":
            cols += [(name, v) for v in sorted({str(r.params[name]) for r in records
                                                if name in r.params})]
        else:
            cols.append((name, None))
    return cols


def _encode(param_sets, cols) -> np.ndarray:
    x = np.full((len(param_sets), len(cols)), math.nan)
    for i, params in enumerate(param_sets):
        for j, (name, value) in enumerate(cols):
            if name not in params:
                continue
            x[i, j] = (1.0 if str(params[name]) == value else 0.0) if value is not None \
                else float(params[name])
    return x


def _model_share(records, in_group, draws) -> dict | None:
    kinds = param_kinds(records)
    if not draws or not kinds or in_group.all() or not in_group.any():
        return None
    cols = _columns(records, kinds)
    tree = DecisionTreeClassifier(max_depth=3, min_samples_leaf=2, random_state=0)
    tree.fit(_encode([r.params for r in records], cols), in_group)
    p = tree.predict_proba(_encode(draws, cols))[:, list(tree.classes_).index(True)]
    return {"share": float(p.mean()), "draws": len(draws), "fitted_on": len(records),
            "what": "depth-3 tree of 'good' over the parameters, averaged over random draws "
                    "from the space"}


def rarity(records, in_group: np.ndarray, undecided: int, draws: list[dict] | None) -> dict:
    """The good group's rarity among the trials and in the space.

    Args:
        records: trials whose place is known (undecided ones left out).
        in_group: ``[len(records)]`` bool.
        undecided: cut trials that could not be placed (reported, counted nowhere).
        draws: parameter sets drawn at random from the space (None: no model estimate).

    Returns:
        ``{"of_trials": {...}, "of_space": {"random_trials": {...} | None, "model": {...} |
        None, "note": str}, "undecided": int}``.
    """
    in_group = np.asarray(in_group, dtype=bool)
    out = {"of_trials": dict(_share(int(in_group.sum()), len(in_group)),
                             what="good trials over the trials placed; a model-based sampler "
                                  "favours good regions, so this overstates their share of "
                                  "the space"),
           "of_space": {"random_trials": None, "model": None, "note": ""},
           "undecided": int(undecided)}
    drawn = np.array([random_drawn(r) for r in records], dtype=bool)
    if drawn.sum() >= MIN_RANDOM:
        out["of_space"]["random_trials"] = dict(
            _share(int((in_group & drawn).sum()), int(drawn.sum())),
            what="good share among the trials drawn at random")
    else:
        out["of_space"]["note"] = (f"only {int(drawn.sum())} placed trials were drawn at "
                                   f"random (at least {MIN_RANDOM} are needed): too thin for "
                                   "a random-draw estimate")
    out["of_space"]["model"] = _model_share(records, in_group, draws)
    return out
