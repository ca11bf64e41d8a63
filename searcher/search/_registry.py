"""Name → implementation registries for samplers and pruners.

Every sampler gets its settings spelled out, so results do not move when Optuna changes a
default.  Seeds: worker ``w`` of a study seeded ``s`` samples with seed ``s + w * SEED_STRIDE``
(a prime), so parallel workers draw different start-up points yet every run is repeatable.
Workers that share a database with other machines also mix in an *origin* (their host name
and process id, see ``sampler_seed``): identical commands on different hosts all have worker
index 0, and without it they would draw the same start-up points.  Each trial records the
sampler seed that drew it (user attribute ``sampler_seed``).

Pruners see one step per epoch, counted from 1 (``trial.report(val_loss, epoch)``):

* ``none``: never prunes;
* ``median`` / ``percentile``: Optuna's MedianPruner / PercentilePruner, comparing with at
  least :data:`MIN_FINISHED` finished trials; the first ``warmup`` epochs are never pruned
  (``n_warmup_steps = warmup + 1``, because steps start at 1);
* ``halving``: SuccessiveHalvingPruner(min_resource=min_epochs, reduction_factor=eta);
* ``hyperband``: HyperbandPruner(min_resource=min_epochs, max_resource=max_epochs,
  reduction_factor=eta) (Li et al., JMLR 2018);
* ``outlook``: our learning-curve extrapolation pruner (:class:`~searcher.search.pruners.OutlookPruner`).

``grid`` enumerates the discrete part of the space (choices and whole-number ranges, every
step); a real-valued dimension takes :data:`GRID_REAL_POINTS` evenly spaced values (in log
space when ``log: true``); derived dimensions are computed, not searched.
"""
from __future__ import annotations

import hashlib
import math
import warnings
from typing import Callable

import optuna

from searcher.errors import UserError
from searcher.options import declared

__all__ = ["SAMPLERS", "PRUNERS", "make_sampler", "make_pruner", "sampler_seed",
           "register_sampler", "register_pruner", "SEED_STRIDE", "MIN_FINISHED",
           "GRID_REAL_POINTS"]

SEED_STRIDE = 1_000_003
MIN_FINISHED = 2
GRID_REAL_POINTS = 3

SAMPLERS: dict[str, Callable] = {}
PRUNERS: dict[str, Callable] = {}


def register_sampler(name: str):
    """Decorator: ``fn(study, cfg: search.sampler, seed) -> BaseSampler`` under ``name``
    (declared in :mod:`searcher.options`)."""
    declared("search.sampler.kind", name)

    def deco(fn):
        SAMPLERS[name] = fn
        return fn
    return deco


def register_pruner(name: str):
    """Decorator: ``fn(cfg: search.pruner) -> BasePruner`` under ``name`` (declared in
    :mod:`searcher.options`)."""
    declared("search.pruner.kind", name)

    def deco(fn):
        PRUNERS[name] = fn
        return fn
    return deco


def sampler_seed(seed: int, worker: int, origin: str = "") -> int:
    """The sampler seed of worker ``worker`` (0-based).

    Args:
        seed: the study's ``search.seed``.
        worker: the worker's index within its ``searcher run`` process.
        origin: ``""`` on a store only this machine uses (repeatable), else ``"host:pid"`` of
            the worker, hashed (sha256, stable across Python runs) into the seed.
    """
    mixed = int(seed) + int(worker) * SEED_STRIDE
    if origin:
        mixed += int.from_bytes(hashlib.sha256(origin.encode()).digest()[:4], "big")
    return mixed % (2 ** 32)


@register_sampler("tpe")
def _tpe(study, cfg, seed):
    multivariate = bool(cfg["multivariate"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
        # group=True lets multivariate TPE model conditional (only_if) dimensions jointly;
        # constant_liar keeps parallel workers from proposing the same point.
        return optuna.samplers.TPESampler(
            n_startup_trials=int(cfg["startup"]), n_ei_candidates=int(cfg["candidates"]),
            multivariate=multivariate, group=multivariate, constant_liar=True, seed=seed)


@register_sampler("random")
def _random(study, cfg, seed):
    return optuna.samplers.RandomSampler(seed=seed)


@register_sampler("gp")
def _gp(study, cfg, seed):
    return optuna.samplers.GPSampler(seed=seed, n_startup_trials=int(cfg["startup"]),
                                     deterministic_objective=False)


@register_sampler("cmaes")
def _cmaes(study, cfg, seed):
    return optuna.samplers.CmaEsSampler(
        seed=seed, n_startup_trials=int(cfg["startup"]),
        independent_sampler=optuna.samplers.RandomSampler(seed=seed),
        warn_independent_sampling=False)


@register_sampler("qmc")
def _qmc(study, cfg, seed):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
        return optuna.samplers.QMCSampler(qmc_type="sobol", scramble=True, seed=seed,
                                          warn_independent_sampling=False)


def grid_space(study) -> dict[str, list]:
    """Optuna parameter name → list of grid values for ``study`` (see the module docstring)."""
    space = {}
    for dim in study.dimensions:
        if dim.kind == "choice":
            space[dim.name] = list(dim.labels)
        elif dim.kind == "int":
            space[dim.name] = dim.values()
        elif dim.kind == "float":
            lo, hi, n = float(dim.lo), float(dim.hi), GRID_REAL_POINTS
            if dim.log:
                inner = [math.exp(math.log(lo) + (math.log(hi) - math.log(lo)) * k / (n - 1))
                         for k in range(1, n - 1)]
            else:
                inner = [lo + (hi - lo) * k / (n - 1) for k in range(1, n - 1)]
            space[dim.name] = [lo, *inner, hi]  # exact ends: Optuna checks the bounds
    return space


@register_sampler("grid")
def _grid(study, cfg, seed):
    return optuna.samplers.GridSampler(grid_space(study), seed=seed)


def make_sampler(study, cfg: dict, seed: int, worker: int = 0,
                 origin: str = "") -> optuna.samplers.BaseSampler:
    """The sampler named by ``search.sampler.kind`` (a wrong name lists the valid ones)."""
    kind = cfg["kind"]
    if kind not in SAMPLERS:
        raise UserError.single(f"must be one of {', '.join(SAMPLERS)}, but got {kind!r}",
                               file=str(getattr(study, "path", "")), path="search.sampler.kind")
    return SAMPLERS[kind](study, cfg, sampler_seed(seed, worker, origin))


@register_pruner("none")
def _none(cfg):
    return optuna.pruners.NopPruner()


@register_pruner("median")
def _median(cfg):
    return optuna.pruners.MedianPruner(n_startup_trials=MIN_FINISHED,
                                       n_warmup_steps=int(cfg["warmup"]) + 1, interval_steps=1)


@register_pruner("percentile")
def _percentile(cfg):
    return optuna.pruners.PercentilePruner(float(cfg["percentile"]),
                                           n_startup_trials=MIN_FINISHED,
                                           n_warmup_steps=int(cfg["warmup"]) + 1,
                                           interval_steps=1)


@register_pruner("halving")
def _halving(cfg):
    return optuna.pruners.SuccessiveHalvingPruner(
        min_resource=int(cfg["min_epochs"]), reduction_factor=int(cfg["eta"]),
        min_early_stopping_rate=0, bootstrap_count=0)


@register_pruner("hyperband")
def _hyperband(cfg):
    return optuna.pruners.HyperbandPruner(
        min_resource=int(cfg["min_epochs"]), max_resource=int(cfg["max_epochs"]),
        reduction_factor=int(cfg["eta"]), bootstrap_count=0)


@register_pruner("outlook")
def _outlook(cfg):
    from .pruners import OutlookPruner

    return OutlookPruner(min_epochs=int(cfg["min_epochs"]), max_epochs=int(cfg["max_epochs"]),
                         margin=float(cfg["margin"]), rank=int(cfg["rank"]),
                         headroom=float(cfg["headroom"]))


def make_pruner(cfg: dict, *, file: str = "") -> optuna.pruners.BasePruner:
    """The pruner named by ``search.pruner.kind`` (a wrong name lists the valid ones)."""
    kind = cfg["kind"]
    if kind not in PRUNERS:
        raise UserError.single(f"must be one of {', '.join(PRUNERS)}, but got {kind!r}",
                               file=file, path="search.pruner.kind")
    return PRUNERS[kind](cfg)
