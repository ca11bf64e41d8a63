"""Prune audit: re-run a stratified sample of pruned trials to the full epoch budget and
count how many would have joined the good group (was the pruner too eager?).

The re-runs are the only place analysis trains; they go through the search layer's
``searcher.search.rerun_config(study, config, tag)`` so that training stays there.
"""
from __future__ import annotations

import math

import numpy as np

from searcher.analysis._expected import wilson_interval
from searcher.analysis._records import TrialRecord, read_trials

__all__ = ["choose_for_audit", "classify_reruns", "prune_audit"]


def choose_for_audit(records: list[TrialRecord], n: int, seed: int = 0) -> list[TrialRecord]:
    """``n`` pruned trials stratified by the epoch they were pruned at.

    Each pruning epoch gets a share proportional to its count (largest remainders first,
    every epoch at least one while ``n`` allows); trials inside an epoch are drawn at random
    with ``seed``.  Returns them in trial-number order.
    """
    pruned = [r for r in records if r.outcome == "pruned"]
    if n <= 0 or not pruned:
        return []
    strata: dict[int, list[TrialRecord]] = {}
    for rec in pruned:
        strata.setdefault(rec.pruned_at or rec.curve.size, []).append(rec)
    n = min(n, len(pruned))
    keys = sorted(strata)
    exact = np.array([len(strata[k]) for k in keys], dtype=float) * n / len(pruned)
    take = np.floor(exact).astype(int)
    if n >= len(keys):
        take = np.maximum(take, 1)
    while take.sum() > n:          # the minimum of one overshot: trim where most over share
        over = np.where(take > 1, take - exact, -np.inf)
        take[np.argmax(over) if np.isfinite(over).any() else np.argmax(take - exact)] -= 1
    for i in np.argsort(-(exact - take), kind="stable"):
        if take.sum() >= n:
            break
        if take[i] < len(strata[keys[i]]):
            take[i] += 1
    rng = np.random.default_rng(seed)
    chosen = []
    for key, k in zip(keys, take):
        members = strata[key]
        chosen += [members[i] for i in sorted(rng.choice(len(members), k, replace=False))]
    return sorted(chosen, key=lambda r: r.number)


def classify_reruns(curves, threshold: float, level: float = 0.95) -> dict:
    """Share of re-run curves whose best loss reaches the good group's ``threshold``.

    Returns ``{"joined": k, "reruns": n, "fraction": k/n, "interval": [lo, hi]}`` with a
    Wilson interval at ``level``.
    """
    best = [float(np.nanmin(c)) if len(c) and np.isfinite(c).any() else math.inf
            for c in curves]
    joined = [b <= threshold for b in best]
    k, n = int(sum(joined)), len(joined)
    lo, hi = wilson_interval(k, n, level)
    return {"joined": k, "reruns": n, "fraction": k / n if n else math.nan,
            "interval": [lo, hi], "best": best, "joined_each": joined}


def prune_audit(study_obj, optuna_study, analysis: dict, n: int, seed: int = 0) -> dict:
    """Re-run ``n`` pruned trials (stratified by pruning epoch) and classify them.

    Args:
        study_obj: the :class:`searcher.spec.Study` the store belongs to.
        optuna_study: the store.
        analysis: the result of :func:`analyze` (its good group's threshold is used).
        n: trials to re-run.

    Returns:
        ``{"status": "done" | "nothing_to_audit", "chosen": [numbers],
        "message": str, ...}`` plus the fields of :func:`classify_reruns` when done.
    """
    chosen = choose_for_audit(read_trials(optuna_study), n, seed)
    out = {"status": "nothing_to_audit", "chosen": [r.number for r in chosen],
           "pruned_at": [r.pruned_at for r in chosen], "message": ""}
    good = analysis.get("good_group")
    if not chosen:
        out["message"] = "no pruned trials to audit"
        return out
    if not good:
        out["message"] = "no distinct good group, so re-runs could not be classified"
        return out
    from searcher.search import rerun_config   # training lives there; import only when used

    runs = [rerun_config(study_obj, rec.config, f"audit-{rec.number}") for rec in chosen]
    out.update(classify_reruns([np.asarray(r["curve"], dtype=float) for r in runs],
                               good["threshold"]))
    out["outcomes"] = [r.get("outcome") for r in runs]
    out["status"] = "done"
    lo, hi = out["interval"]
    out["message"] = (f"{out['joined']} of {out['reruns']} pruned trials re-run to the full "
                      f"budget reached '{good['label']}' ({out['fraction']:.0%}, 95% Wilson "
                      f"interval {lo:.0%}-{hi:.0%})")
    return out
