"""Replay Optuna pruners over known full learning curves, and synthetic crossing curves.

A replay runs a real Optuna study (in-memory storage) in which every trial "trains" by
reading the next epoch of a ground-truth curve: ``study.ask()``, ``trial.report`` per epoch,
``trial.should_prune()``, then ``study.tell`` as PRUNED or COMPLETE with the best value, as a
search worker would.  Because the full curves are known, the replay can say what pruning
cost: epochs saved, best loss lost, and how many ground-truth good curves were cut.
"""
from __future__ import annotations

import math
import time
from dataclasses import asdict, dataclass, field
from functools import partial
from typing import Callable, Mapping, Sequence

import numpy as np
import optuna
from optuna.trial import TrialState

from searcher.search.pruners import OutlookPruner, prob_beats
from searcher.search._registry import make_pruner

__all__ = ["ReplayResult", "crossing_curves", "good_mask", "replay", "replay_order",
           "compare_pruners",
           "replay_pruners", "measure_call_cost", "format_replay_table"]


@dataclass(frozen=True)
class ReplayResult:
    """What one pruner did to one set of curves.

    Attributes:
        pruner: label of the pruner.
        epochs: epochs trained in total under the pruner.
        epochs_full: epochs without pruning (sum of curve lengths).
        epoch_ratio: ``epochs / epochs_full``.
        best: best value among COMPLETE trials (what the search would pick); NaN if none.
        best_full: best value over the full-length curves (an unpruned search's pick).
        best_ratio: ``best / best_full`` (1.0 = the best curve survived).
        pruned: number of trials pruned.
        good: size of the ground-truth good group.
        wrongly_pruned: good-group members pruned.
        wrongly_pruned_rate: ``wrongly_pruned / good`` (0.0 when the group is empty).
        pruned_at: per curve, in the order given, the epoch it was pruned at (None = completed).
        study: the replayed Optuna study (not part of :meth:`to_dict`).
    """

    pruner: str
    epochs: int
    epochs_full: int
    epoch_ratio: float
    best: float
    best_full: float
    best_ratio: float
    pruned: int
    good: int
    wrongly_pruned: int
    wrongly_pruned_rate: float
    pruned_at: tuple[int | None, ...]
    study: optuna.Study = field(repr=False, compare=False)

    def summary(self) -> dict:
        """The figures a benchmark keeps: ``epochs_ratio``, ``best_ratio``,
        ``wrongly_pruned_rate``, ``pruned`` and ``good_size``."""
        return {"epochs_ratio": self.epoch_ratio, "best_ratio": self.best_ratio,
                "wrongly_pruned_rate": self.wrongly_pruned_rate, "pruned": self.pruned,
                "good_size": self.good}

    def to_dict(self) -> dict:
        d = asdict(self)
        d.pop("study")
        d["pruned_at"] = list(self.pruned_at)
        return d


def crossing_curves(n_slow: int = 8, n_fast: int = 16, epochs: int = 30, noise: float = 0.03,
                    seed: int = 0) -> tuple[list[np.ndarray], np.ndarray]:
    """Synthetic validation-loss curves that cross, for tests and the crossing benchmark.

    This generator exists so the benchmark can show curves that cross, the case rung-based
    pruners get wrong: *slow starters* sit on a plateau near 10^-1.5 for a random 2-12 epochs
    and then drop by 2-3 decades (ending below 10^-3.5), while *fast stallers* fall from 1
    within a few epochs and then stall on a plateau at 10^-3.  Noise is Gaussian in log10
    (``noise`` decades).  The returned mask marks the slow starters, which hold the best
    final losses.

    Args:
        n_slow: number of slow starters.
        n_fast: number of fast stallers.
        epochs: curve length (the full budget).
        noise: standard deviation of log10 noise per epoch.
        seed: numpy seed; the same seed gives the same curves.

    Shapes:
        each curve: [epochs]; mask: [n_slow + n_fast], slow starters first.

    Example:
        >>> curves, slow = crossing_curves(2, 3, epochs=10)
        >>> len(curves), int(slow.sum()), curves[0].shape
        (5, 2, (10,))
    """
    rng = np.random.default_rng(seed)
    x = np.arange(1, epochs + 1, dtype=float)
    curves = []
    for _ in range(n_slow):
        start, drop = rng.uniform(-1.7, -1.3), rng.uniform(2.0, 3.0)
        plateau, tau = rng.integers(2, 13), rng.uniform(2.0, 4.0)
        y = start - drop * (1.0 - np.exp(-np.clip(x - plateau, 0.0, None) / tau))
        curves.append(10.0 ** (y + rng.normal(0.0, noise, epochs)))
    for _ in range(n_fast):
        floor, tau = rng.uniform(-3.1, -2.9), rng.uniform(0.8, 1.5)
        y = floor - floor * np.exp(-(x - 1.0) / tau)
        curves.append(10.0 ** (y + rng.normal(0.0, noise, epochs)))
    mask = np.r_[np.ones(n_slow, bool), np.zeros(n_fast, bool)]
    return curves, mask


def good_mask(curves: Sequence[np.ndarray], decades: float = 1.0) -> np.ndarray:
    """Default good group: curves whose best loss is within ``decades`` of the overall best.

    Shapes:
        returns: [len(curves)] bool.
    """
    best = np.array([np.nanmin(np.asarray(c, float)) for c in curves])
    return best <= np.nanmin(best) * 10.0 ** decades


def replay_order(n: int, seed: int) -> np.ndarray:
    """The order in which :func:`replay` turns ``n`` curves into trials."""
    return np.random.default_rng(seed).permutation(n)


def replay(curves: Sequence[np.ndarray], pruner: optuna.pruners.BasePruner, *,
           good: np.ndarray | None = None, seed: int = 0, label: str = "") -> ReplayResult:
    """Replay one pruner over full curves in a real in-memory Optuna study.

    A curve shorter than the longest is a run that diverged at its last epoch: it is
    reported epoch by epoch like the others and, if no pruner cut it first, told PRUNED
    after its last epoch, as the search worker tells a diverged trial.  It is not counted as
    pruned, and its epochs count in ``epochs_full``.

    Args:
        curves: ground-truth validation loss per epoch (epoch 1 first); the longest length is
            the full budget.
        pruner: a fresh pruner instance (pruners such as Hyperband keep state).
        good: bool mask of the ground-truth good group; default :func:`good_mask`.
        seed: seeds the order in which curves become trials (and names the study, which
            Hyperband's bracket hash reads).
        label: name used in the result; default the pruner's class name.

    Shapes:
        curves: list of [epochs]; good: [len(curves)].

    Example:
        >>> curves, slow = crossing_curves(2, 3, epochs=10)
        >>> replay(curves, optuna.pruners.NopPruner(), good=slow).epoch_ratio
        1.0
    """
    arrays = [np.asarray(c, dtype=float) for c in curves]
    if not arrays or any(a.ndim != 1 or a.size == 0 for a in arrays):
        raise ValueError("curves must be a non-empty list of non-empty 1-D arrays, but got "
                         f"shapes {sorted({a.shape for a in arrays})}.")
    budget = max(a.size for a in arrays)
    good = good_mask(arrays) if good is None else np.asarray(good, dtype=bool)
    if good.shape != (len(arrays),):
        raise ValueError(f"good must have shape ({len(arrays)},), but got {good.shape}.")
    study = optuna.create_study(storage=optuna.storages.InMemoryStorage(),
                                sampler=optuna.samplers.RandomSampler(seed=seed),
                                pruner=pruner, direction="minimize",
                                study_name=f"replay-{seed}")
    pruned_at: list[int | None] = [None] * len(arrays)
    spent = 0
    for i in replay_order(len(arrays), seed):
        trial = study.ask()
        best = math.inf
        for epoch, value in enumerate(arrays[i], start=1):
            spent += 1
            trial.report(float(value), epoch)
            if math.isfinite(value):
                best = min(best, float(value))
            if epoch < budget and trial.should_prune():  # as the worker: never at the end
                pruned_at[i] = epoch
                break
        if pruned_at[i] is None and arrays[i].size == budget:
            study.tell(trial, best if math.isfinite(best) else math.nan)
        else:
            study.tell(trial, state=TrialState.PRUNED)
    finals = [t.value for t in study.get_trials(states=(TrialState.COMPLETE,))
              if t.value is not None and math.isfinite(t.value)]
    best_found = min(finals) if finals else math.nan
    # What an unpruned search would pick: the best of the runs that did not diverge.
    best_full = float(np.nanmin([np.nanmin(a) for a in arrays if a.size == budget]))
    full = sum(a.size for a in arrays)
    cut = np.array([p is not None for p in pruned_at])
    n_good, wrong = int(good.sum()), int((cut & good).sum())
    return ReplayResult(pruner=label or type(pruner).__name__, epochs=spent, epochs_full=full,
                        epoch_ratio=spent / full, best=best_found, best_full=best_full,
                        best_ratio=best_found / best_full, pruned=int(cut.sum()), good=n_good,
                        wrongly_pruned=wrong, wrongly_pruned_rate=wrong / n_good if n_good else 0.0,
                        pruned_at=tuple(pruned_at), study=study)


def replay_pruners(max_epochs: int, *, min_epochs: int = 1, eta: int = 3, warmup: int = 2,
                   percentile: float = 25.0, margin: float = 0.05, rank: int = 3,
                   kinds: Sequence[str] = ("none", "median", "hyperband", "outlook"),
                   headroom: float = 0.5, headrooms: Sequence[float] = ()
                   ) -> dict[str, Callable[[], optuna.pruners.BasePruner]]:
    """Factories for the pruners a replay compares, keyed by YAML pruner kind.

    They are built by :func:`make_pruner` from a ``search.pruner`` mapping (the options of
    defaults.yaml), so a replay judges exactly the pruner a study would run.  Note that
    ``warmup`` epochs are never pruned by median/percentile, while ``min_epochs`` is the first
    epoch outlook may prune: ``warmup = min_epochs - 1`` lines them up.  Each of
    ``headrooms`` adds an outlook row labelled ``outlook headroom=<h>`` with that headroom.
    """
    cfg = {"min_epochs": min_epochs, "max_epochs": max_epochs, "eta": eta, "warmup": warmup,
           "percentile": percentile, "margin": margin, "rank": rank, "headroom": headroom}
    out = {kind: partial(make_pruner, {**cfg, "kind": kind}) for kind in kinds}
    for h in headrooms:
        out[f"outlook headroom={h:g}"] = partial(make_pruner, {**cfg, "kind": "outlook",
                                                             "headroom": float(h)})
    return out


def compare_pruners(curves: Sequence[np.ndarray],
                    factories: Mapping[str, Callable[[], optuna.pruners.BasePruner]], *,
                    good: np.ndarray | None = None, seed: int = 0) -> list[ReplayResult]:
    """Replay each pruner (a fresh one from its factory) over the same curves and order."""
    return [replay(curves, make(), good=good, seed=seed, label=name)
            for name, make in factories.items()]


def format_replay_table(rows: Mapping[str, Mapping]) -> str:
    """Plain-text table of replay results, one row per pruner.

    Args:
        rows: pruner label → :meth:`ReplayResult.summary` (also the benchmark record's form).
    """
    width = max([10, *(len(label) for label in rows)])
    lines = [f"{'pruner':<{width}} {'epoch ratio':>11} {'best ratio':>10} {'pruned':>6} "
             f"{'good cut':>9}"]
    for label, r in rows.items():
        cut = f"{round(r['wrongly_pruned_rate'] * r['good_size'])}/{r['good_size']}"
        lines.append(f"{label:<{width}} {r['epochs_ratio']:>11.3f} {r['best_ratio']:>10.3f} "
                     f"{r['pruned']:>6d} {cut:>9}")
    return "\n".join(lines)


def measure_call_cost(points: int = 30, calls: int = 40, seed: int = 0) -> dict:
    """Wall-clock cost of one :meth:`OutlookPruner.prune` call on a ``points``-epoch curve.

    A real in-memory study holds three finished slow starters; every call then judges a fast
    staller's first ``points`` epochs (whose best does not beat the target, so the full
    extrapolation runs).  The numbers are for the benchmark; tests never assert on them.

    Returns:
        ``{"points", "calls", "median_ms", "max_ms", "p_fit"}`` (``p_fit``: the fit's
        probability for the judged curve, below 1 when the extrapolation ran).
    """
    curves, _ = crossing_curves(n_slow=3, n_fast=1, epochs=points + 1, seed=seed)
    pruner = OutlookPruner(min_epochs=1, max_epochs=points + 1, rank=3, headroom=0.0)
    study = optuna.create_study(storage=optuna.storages.InMemoryStorage(), pruner=pruner,
                                direction="minimize", study_name=f"cost-{seed}")
    for curve in curves[:3]:
        trial = study.ask()
        for epoch, value in enumerate(curve, start=1):
            trial.report(float(value), epoch)
        study.tell(trial, float(curve.min()))
    running = study.ask()
    for epoch, value in enumerate(curves[3][:points], start=1):
        running.report(float(value), epoch)
    frozen = study.get_trials(deepcopy=False)[-1]
    times = []
    for _ in range(calls):
        t0 = time.perf_counter()
        pruner.prune(study, frozen)
        times.append((time.perf_counter() - t0) * 1e3)
    # The fit's own verdict on the judged curve: finite and below 1 shows the timed calls ran
    # the whole extrapolation rather than an early exit.
    target = sorted(float(c.min()) for c in curves[:3])[2]
    p_fit = prob_beats(curves[3][:points], points + 1, target)
    return {"points": points, "calls": calls, "median_ms": float(np.median(times)),
            "max_ms": float(np.max(times)), "p_fit": float(p_fit)}
