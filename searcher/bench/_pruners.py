"""Pruner benchmark: replay none / median / Hyperband / outlook over ground-truth curves.

Ground truth: a fixed, seeded sample of configurations from a study's space is trained to the
full epoch budget once (a pool of processes, one torch thread each) and cached as JSON under
``runs/bench-cache/pruner-truth-<key>.json``; the key hashes the study hash, the data hash,
the sample seed, the training seeds, the epoch budget and any config overrides, so a cache is
reused only for exactly the same curves.  Every pruner is then replayed over the same curves
in the same order (:func:`searcher.testing.replay`) and judged on epochs spent, best loss kept
and ground-truth good-group members cut.  The good group is the analysis layer's
(:func:`searcher.analysis.find_groups` on the full curves); without a distinct good group
the best decile stands in, and the notes say so.

Two benchmark configurations: the demo space as it is, and synthetic crossing curves
(slow starters that sit on a plateau and then drop past fast stallers), because rung-based
pruners are only wrong where curves cross.  A slow-start variant of the demo space (long
learning-rate warm-up) is a third, real-training configuration where crossing is likelier.
"""
from __future__ import annotations

import copy
import hashlib
import json
import math
import multiprocessing
import sys
import time
from pathlib import Path

import numpy as np

__all__ = ["truth_curves", "crossing_pairs", "bench_pruners", "format_bench_pruners",
           "TRUTH_DIR"]

TRUTH_DIR = Path("runs") / "bench-cache"
# Two curves "cross" when their order at the first prunable epoch and at the end differ by
# more than this many decades on both sides (validation noise on 8 graphs is a few percent).
_CROSS_NOISE = 0.05

# A second outlook row runs the plain k-th-best rule (``headroom: 0``) beside the study's
# setting (default 0.5 decade), to show what the headroom buys.
PLAIN = 0.0

_WORKER: dict = {}


def _init_worker(study_path: str) -> None:
    import torch

    from searcher.spec import load_study

    torch.set_num_threads(1)
    _WORKER["study"] = load_study(study_path)


def _train_one(job: tuple[int, dict, int]) -> tuple[int, list[float], str, float]:
    from searcher.search import train_config

    index, config, seed = job
    t0 = time.perf_counter()
    _, result, _ = train_config(_WORKER["study"], config, seed=seed)
    return index, [float(v) for v in result.curve], result.status, time.perf_counter() - t0


def _run_jobs(jobs: list, study_path: str, workers: int):
    """Train jobs in a spawned pool (one torch thread per process), or here for 1 worker."""
    if workers <= 1:
        _init_worker(study_path)
        yield from map(_train_one, jobs)
        return
    with multiprocessing.get_context("spawn").Pool(workers, initializer=_init_worker,
                                                   initargs=(study_path,)) as pool:
        yield from pool.imap_unordered(_train_one, jobs)


def truth_curves(study_path: str | Path, n: int, *, seed: int = 0, epochs: int | None = None,
                 overrides: dict | None = None, workers: int = 2,
                 cache_dir: str | Path = TRUTH_DIR, log=None) -> dict:
    """Ground-truth validation curves of ``n`` configs sampled from a study, cached.

    Args:
        study_path: study YAML.
        n: configs drawn with ``study.sample(n, seed)``; config ``i`` trains with seed
            ``seed + i``.
        seed: sample seed.
        epochs: epoch budget (default: the study's ``training.epochs``).
        overrides: ``{section: {key: value}}`` merged into every config's sections (e.g.
            ``{"training": {"warmup_epochs": 6}}`` for the slow-start variant).
        workers: training processes (each one torch thread).
        cache_dir: folder of the JSON cache.
        log: ``log(str)`` for progress; default prints to stderr.

    Returns:
        ``{"key", "path", "study_hash", "data_hash", "epochs", "curves" (list of lists; a
        diverged run's curve ends at its diverged epoch), "status", "seconds",
        "cached" (bool)}``.
    """
    from searcher.search import study_dataset
    from searcher.spec import load_study

    log = log or (lambda s: print(s, file=sys.stderr, flush=True))
    study = load_study(study_path)
    configs = study.sample(n, seed)
    for cfg in configs:
        for section, values in (overrides or {}).items():
            cfg[section].update(copy.deepcopy(values))
        if epochs is not None:
            cfg["training"]["epochs"] = int(epochs)
    budget = int(configs[0]["training"]["epochs"])
    data_hash = study_dataset(study, configs[0]["task"]).hash
    seeds = [seed + i for i in range(n)]
    ident = {"study_hash": study.hash, "data_hash": data_hash, "n": n, "sample_seed": seed,
             "train_seeds": seeds, "epochs": budget, "overrides": overrides or {}}
    key = hashlib.sha256(json.dumps(ident, sort_keys=True).encode()).hexdigest()[:16]
    path = Path(cache_dir) / f"pruner-truth-{key}.json"
    if path.exists():
        return {**json.loads(path.read_text()), "path": str(path), "cached": True}
    curves: list = [None] * n
    status: list = [None] * n
    t0 = time.perf_counter()
    jobs = [(i, cfg, s) for i, (cfg, s) in enumerate(zip(configs, seeds))]
    for done, (i, curve, st, sec) in enumerate(_run_jobs(jobs, str(study.path), workers), 1):
        curves[i], status[i] = curve, st
        log(f"ground truth {done}/{n}: config {i} {st} after {len(curve)} epochs "
            f"({sec:.1f} s)")
    out = {"key": key, **ident, "curves": curves, "status": status,
           "seconds": time.perf_counter() - t0}
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(out))
    return {**out, "path": str(path), "cached": False}


def crossing_pairs(curves, at: int, noise: float = _CROSS_NOISE) -> int:
    """Pairs of curves whose order at epoch ``at`` and at the end (best value) differ.

    A pair counts only when both gaps exceed ``noise`` decades: curve a is ahead of b by
    more than the noise at epoch ``at`` and behind it by more than the noise at the end.
    Curves shorter than ``at`` (diverged) are left out.

    Example:
        >>> crossing_pairs([np.array([1.0, 0.1]), np.array([0.5, 0.4])], at=1)
        1
    """
    rows = [np.log10(np.asarray(c, float)) for c in curves if len(c) >= at]
    early = np.array([r[at - 1] for r in rows])
    final = np.array([np.nanmin(np.where(np.isfinite(r), r, np.nan)) for r in rows])
    ahead = early[:, None] < early[None, :] - noise       # a ahead of b early
    behind = final[:, None] > final[None, :] + noise      # a behind b at the end
    return int((ahead & behind).sum())


def _good_group(curves: list[np.ndarray]) -> tuple[np.ndarray, str]:
    """Good-group mask from the analysis layer over the full-length curves, or best decile.

    Diverged runs (shorter curves) are left out of the grouping: their huge first losses
    would otherwise make every run that trained at all look "good"."""
    from searcher.analysis import find_groups

    budget = max(c.size for c in curves)
    full = np.array([i for i, c in enumerate(curves) if c.size == budget])
    mask = np.zeros(len(curves), dtype=bool)
    groups = find_groups([curves[i] for i in full])
    if groups.good is not None:
        mask[full[np.array(groups.labels) == groups.good]] = True
        return mask, f"good group: the analysis layer's '{groups.good}' ({groups.rule})"
    best = np.array([np.nanmin(curves[i]) for i in full])
    mask[full[best <= np.quantile(best, 0.1)]] = True
    return mask, f"{groups.note}; the best decile stands in for the good group"


def _clairvoyant_ratio(curves: list[np.ndarray], good: np.ndarray, first: int) -> float:
    """Epoch ratio of a clairvoyant pruner: good curves run in full, every other full curve
    stops at ``first`` (the first epoch a pruner may act), diverged runs as they are."""
    budget = max(c.size for c in curves)
    spent = sum(c.size if (g or c.size < budget) else min(first, c.size)
                for c, g in zip(curves, good))
    return spent / sum(c.size for c in curves)


def _online_ratio(curves: list[np.ndarray], good: np.ndarray, first: int, rank: int,
                  seed: int) -> float:
    """Epoch ratio of a clairvoyant pruner that must wait, as any k-th-best rule must.

    It knows which curves are good, but it has nothing to compare with until ``rank`` good
    curves have finished: until then every curve runs in full (it could be the best so far);
    afterwards good curves run in full and the others stop at ``first``.  Trials start in the
    replay's order (:func:`searcher.testing.replay_order`).
    """
    from searcher.testing import replay_order

    budget = max(c.size for c in curves)
    spent, finished_good = 0, 0
    for i in replay_order(len(curves), seed):
        c = curves[i]
        if good[i] or c.size < budget or finished_good < rank:
            spent += c.size
            finished_good += int(good[i] and c.size == budget)
        else:
            spent += min(first, c.size)
    return spent / sum(c.size for c in curves)


def _bench_one(curves, good, note, *, max_epochs: int, min_epochs: int, rank: int,
               margin: float, headroom: float, eta: int, seed: int) -> dict:
    from searcher.testing import compare_pruners, replay_pruners

    factories = replay_pruners(max_epochs, min_epochs=min_epochs, warmup=min_epochs - 1,
                               eta=eta, margin=margin, rank=rank, headroom=headroom,
                               headrooms=(PLAIN,) if headroom != PLAIN else ())
    results = compare_pruners(curves, factories, good=good, seed=seed)
    table = {r.pruner: r.summary() for r in results}
    goals = {name: bool(row["epochs_ratio"] <= 1 / 3 and row["best_ratio"] <= 1.1
                        and row["wrongly_pruned_rate"] <= 0.05)
             for name, row in table.items() if name.startswith("outlook")}
    return {"pruners": table, "curves": len(curves), "epochs": max_epochs,
            "settings": {"min_epochs": min_epochs, "rank": rank, "margin": margin,
                         "eta": eta, "order_seed": seed, "headroom": headroom},
            "crossing_pairs": crossing_pairs(curves, min_epochs),
            "clairvoyant_epochs_ratio": _clairvoyant_ratio(curves, good, min_epochs),
            "online_epochs_ratio": _online_ratio(curves, good, min_epochs, rank, seed),
            "goal_met": any(goals.values()), "goal_met_by": goals,
            "notes": [note]}


def bench_pruners(quick: bool = False, *, study_path: str | Path = "studies/demo.yaml",
                  cache_dir: str | Path = TRUTH_DIR, workers: int = 2, n: int | None = None,
                  epochs: int | None = None, log=None) -> dict:
    """Replay none / median / Hyperband / outlook on every benchmark configuration.

    Configurations: ``demo`` (ground truth of the study's space), ``demo_warmup`` (the same
    configs with a learning-rate warm-up over a third of the budget: slow starters) and
    ``crossing`` (synthetic crossing curves, 6 slow starters among 60, 30 epochs).  Pruner
    settings come from the study's ``search.pruner`` (min_epochs, eta, margin, rank, headroom).

    Args:
        quick: 16 configs x 8 epochs instead of 60 x the study's budget.
        study_path: the study whose space is sampled.
        cache_dir: ground-truth cache folder.
        workers: training processes.
        n, epochs: override the number of configs / the epoch budget.
        log: progress callback (default: stderr).

    Returns:
        ``{name: {"pruners": {kind: {epochs_ratio, best_ratio, wrongly_pruned_rate, pruned,
        good_size}}, "crossing_pairs", "clairvoyant_epochs_ratio", "goal_met", "notes", ...},
        "call_cost": {...}}``.
    """
    from searcher.testing import crossing_curves, measure_call_cost
    from searcher.spec import load_study

    study = load_study(study_path)
    pcfg = study.fixed()["search"]["pruner"]
    n = n or (16 if quick else 60)
    budget = epochs or (8 if quick else int(study.fixed()["training"]["epochs"]))
    min_epochs = min(int(pcfg["min_epochs"]), budget - 1)
    opts = dict(rank=int(pcfg["rank"]), margin=float(pcfg["margin"]),
                headroom=float(pcfg["headroom"]),
                eta=int(pcfg["eta"]), seed=0)
    out: dict = {}
    variants = {"demo": None,
                "demo_warmup": {"training": {"warmup_epochs": max(1, budget // 3)}}}
    for name, overrides in variants.items():
        truth = truth_curves(study_path, n, seed=0, epochs=budget, overrides=overrides,
                             workers=workers, cache_dir=cache_dir, log=log)
        curves = [np.asarray(c, dtype=float) for c in truth["curves"]]
        if all(c.size < budget for c in curves):
            out[name] = {"notes": ["every run diverged: nothing to replay"],
                         "truth": truth["path"]}
            continue
        good, note = _good_group(curves)
        row = _bench_one(curves, good, note, max_epochs=budget, min_epochs=min_epochs,
                         **opts)
        diverged = sum(c.size < budget for c in curves)
        row["notes"].append(f"{diverged} of {len(curves)} runs diverged (kept; no pruner "
                            "is charged for them)")
        if row["crossing_pairs"] == 0:
            row["notes"].append(f"no two curves cross between epoch {min_epochs} and the "
                                "end by more than the noise")
        row["truth"] = truth["path"]
        out[name] = row
    cross_epochs = 12 if quick else 30
    curves, slow = crossing_curves(n_slow=2 if quick else 6, n_fast=10 if quick else 54,
                                   epochs=cross_epochs, seed=0)
    out["crossing"] = _bench_one(curves, slow, "good group: the slow starters (by "
                                 "construction they hold the best final losses)",
                                 max_epochs=cross_epochs, min_epochs=5, **opts)
    out["call_cost"] = measure_call_cost(points=budget, calls=5 if quick else 40)
    return out


def format_bench_pruners(result: dict) -> str:
    """Plain-text tables of :func:`bench_pruners`, one block per configuration."""
    from searcher.testing import format_replay_table

    lines = []
    for name, row in result.items():
        if name == "call_cost":
            lines.append(f"outlook cost per call ({row['points']} epochs): median "
                         f"{row['median_ms']:.1f} ms, max {row['max_ms']:.1f} ms")
            continue
        lines.append(f"[{name}]")
        if "pruners" in row:
            lines.append(format_replay_table(row["pruners"]))
            rank = row["settings"]["rank"]
            lines.append(f"crossing pairs: {row['crossing_pairs']}; clairvoyant epoch ratio: "
                         f"{row['clairvoyant_epochs_ratio']:.3f} (waiting for {rank} good "
                         f"finishers first: {row['online_epochs_ratio']:.3f}); goal met: "
                         f"{row['goal_met']}")
        lines += [f"  note: {n}" for n in row["notes"]]
    return "\n".join(lines)
