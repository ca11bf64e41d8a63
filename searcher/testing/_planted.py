"""Synthetic studies in the real store format (the search layer's trial record contract),
for tests and the analysis benchmark.

Curves come from five plain generators of our own (deep, steady, stall, erratic, blow-up);
nothing here is trained.  Parameter names are dotted key paths as the search layer writes
them; every deep trial has lmax = 2 and basis = bessel (the planted trait).
"""
from __future__ import annotations

import numpy as np
import optuna
from optuna.distributions import (CategoricalDistribution, FloatDistribution,
                                  IntDistribution)

__all__ = ["EPOCHS", "planted_curves", "planted_study", "add_trial"]

EPOCHS = 18
DISTRIBUTIONS = {
    "model.hidden.lmax": IntDistribution(1, 3),
    "model.radial.basis": CategoricalDistribution(["bessel", "gaussian", "cosine"]),
    "training.learning_rate": FloatDistribution(3e-4, 3e-2, log=True),
    "model.radial.power": IntDistribution(4, 8, step=2),
}


def planted_curves(n=300, rare=3, noise=0.02, seed=0, cut_share=0.3):
    """``n`` curves from five generators, ``rare`` of them deep; ~30% of the others cut at
    epoch 6 or 12 as a pruner would.  Returns (curves, kinds)."""
    rng = np.random.default_rng(seed)
    shares = {"steady": .35, "stall": .3, "erratic": .15, "blowup": .2}
    kinds = ["deep"] * rare
    for kind, share in shares.items():
        kinds += [kind] * int(round((n - rare) * share))
    kinds = (kinds + ["steady"] * n)[:n]
    t = np.arange(1, EPOCHS + 1)
    curves = []
    for kind in kinds:
        a = rng.uniform(0.8, 1.2)
        cut = int(rng.choice([6, 12])) if rng.random() < cut_share else EPOCHS
        if kind == "deep":
            y, cut = np.log10(a * 0.5 * t ** -2.5 + 1e-4), EPOCHS
        elif kind == "steady":
            y = np.log10(a * 0.5 * t ** -rng.uniform(0.6, 0.9))
        elif kind == "stall":
            y = np.log10(a * 0.3 + 0.4 * np.exp(-t / rng.uniform(0.8, 1.5)))
        elif kind == "erratic":
            y = np.log10(a * 0.15) + rng.normal(0, 0.25, EPOCHS)
        else:
            onset = int(rng.integers(3, 7))
            y = np.log10(a * 0.5 * t ** -0.7)
            y[onset:] += 0.4 * (t[onset:] - onset)
            cut = max(cut, onset + 4) if cut < EPOCHS else cut
        y = y + rng.normal(0, noise, EPOCHS)
        curves.append(10 ** y[:cut])
    return curves, kinds


def _params(rng, good):
    lmax = 2 if good else int(rng.integers(1, 4))
    basis = "bessel" if good else str(rng.choice(["bessel", "gaussian", "cosine"]))
    params = {"model.hidden.lmax": lmax, "model.radial.basis": basis,
              "training.learning_rate": float(np.exp(rng.uniform(np.log(3e-4), np.log(3e-2))))}
    if basis == "bessel":   # conditional dimension: only active for one basis
        params["model.radial.power"] = int(rng.choice([4, 6, 8]))
    return params


def add_trial(study, curve, params, outcome, *, cpu=1.0, data_hash="d0", study_hash="s0",
              config=None):
    """Add one finished trial following the record contract."""
    curve = np.asarray(curve, dtype=float)
    best = float(np.nanmin(curve)) if curve.size else None
    state = {"completed": optuna.trial.TrialState.COMPLETE,
             "pruned": optuna.trial.TrialState.PRUNED}.get(outcome, optuna.trial.TrialState.FAIL)
    attrs = {"config": config or {}, "study_hash": study_hash, "data_hash": data_hash,
             "outcome": outcome, "reason": "", "best_value": best,
             "best_epoch": int(np.nanargmin(curve)) + 1 if curve.size else 0,
             "epochs": int(curve.size), "cpu_seconds": cpu * curve.size, "gate": {}, "cost": {},
             "mlflow_run_id": ""}
    if outcome == "pruned":
        attrs["pruned_at"] = int(curve.size)
    study.add_trial(optuna.trial.create_trial(
        state=state, value=best if state == optuna.trial.TrialState.COMPLETE else None,
        params=params, distributions={k: DISTRIBUTIONS[k] for k in params},
        user_attrs=attrs, intermediate_values={i + 1: float(v) for i, v in enumerate(curve)}))


def planted_study(n=120, rare=6, seed=0, name="planted", storage=None, noise=0.02,
                  data_hash="d0"):
    """A study whose deep trials all have lmax = 2 and basis = bessel (the planted trait)."""
    rng = np.random.default_rng(seed + 1)
    study = optuna.create_study(study_name=name, storage=storage, direction="minimize")
    curves, kinds = planted_curves(n=n, rare=rare, noise=noise, seed=seed)
    for curve, kind in zip(curves, kinds):
        outcome = "pruned" if curve.size < EPOCHS else (
            "diverged" if kind == "blowup" else "completed")
        add_trial(study, curve, _params(rng, kind == "deep"), outcome, data_hash=data_hash)
    return study, kinds
