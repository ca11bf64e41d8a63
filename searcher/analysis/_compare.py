"""``compare``: which search space reaches a good loss with fewer trials and less compute.

Each study is treated as a pool of trials.  A trial without a loss (rejected, failed)
counts as the worst loss seen in any compared study, so it costs a draw but never wins.
Compute per trial is its CPU-hours (epochs where no CPU time was recorded); the expected
cost of n trials is n times the mean, so "expected best vs compute" pairs the two.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from searcher.analysis._analyze import SAFETY
from searcher.analysis._json import dumps
from searcher.analysis._expected import (bootstrap_band, expected_best_curve, trials_to_hit,
                                         wilson_interval)
from searcher.analysis._plots import plot_bars, plot_lines
from searcher.analysis._records import read_trials
from searcher.analysis._space import check_comparable, space_diff
from searcher.errors import UserError, ensure_folder

__all__ = ["compare"]

_REPS = 1000
_INDEPENDENCE = ("The expected-best estimators assume independent draws; a model-based "
                 "sampler (TPE) chooses trials from earlier ones, so its curve describes the "
                 "pool of trials it produced, not a fresh search of that size.")


def _pool(study, store) -> dict:
    recs = read_trials(store)
    loss = np.array([r.best_value for r in recs], dtype=float)
    epochs = np.array([r.curve.size for r in recs], dtype=float)
    cpu_h = np.array([r.cpu_seconds for r in recs], dtype=float) / 3600
    n = max(len(recs), 1)
    return {"study": study.name, "sampler": study.fixed()["search"]["sampler"]["kind"],
            "records": recs, "loss": loss, "epochs": epochs, "cpu_hours": cpu_h,
            "shares": {k: sum(r.outcome == k for r in recs) / n
                       for k in ("rejected", "diverged", "pruned", "failed")},
            "hashes": {r.data_hash for r in recs if r.data_hash}}


def _cost(pool) -> tuple[np.ndarray, str]:
    if pool["cpu_hours"].sum() > 0:
        return pool["cpu_hours"], "CPU-hours"
    return pool["epochs"], "epochs"


def _ratio_interval(a, b, target, reps=_REPS, seed=0):
    """Bootstrap of (A's compute to first hit) / (B's): mean cost per trial / hit rate."""
    rng = np.random.default_rng(seed)
    (ca, _), (cb, _) = _cost(a), _cost(b)
    ratios = []
    for _ in range(reps):
        ia, ib = rng.integers(0, ca.size, ca.size), rng.integers(0, cb.size, cb.size)
        pa, pb = (a["loss"][ia] <= target).mean(), (b["loss"][ib] <= target).mean()
        cost_a = ca[ia].mean() / pa if pa else math.inf
        cost_b = cb[ib].mean() / pb if pb else math.inf
        if math.isfinite(cost_a) or math.isfinite(cost_b):
            ratios.append(cost_a / cost_b if cost_b else math.inf)
    if len(ratios) < reps / 2:
        return None
    ratios = np.array(ratios)
    # empirical quantiles, no interpolation: resamples without a hit give infinite ratios
    return [float(np.percentile(ratios, q, method="inverted_cdf")) for q in (5, 50, 95)]


def _verdict(a, b, target, unit) -> tuple[str, list | None]:
    if not ((a["loss"] <= target).any() or (b["loss"] <= target).any()):
        return (f"no clear difference: neither {a['study']} nor {b['study']} reached the "
                f"target {target:.3g}"), None
    band = _ratio_interval(a, b, target)
    if band is None:
        return "no clear difference: too few hits to bound the compute ratio", None
    lo, mid, hi = band

    def inv(x):
        return math.inf if x == 0 else 1 / x

    def num(x):  # a resample with no hit on one side has an unbounded ratio
        return "∞" if math.isinf(x) else f"{x:.2g}"

    def rng(low, high):
        return f"(90% bootstrap interval {num(low)}–{num(high)}×, approximate)"
    if lo > 1:
        return (f"{b['study']} reaches the target with about {num(mid)}× less compute "
                f"({unit}) than {a['study']} {rng(lo, hi)}"), band
    if hi < 1:  # the same ratio read the other way round, interval inverted with it
        return (f"{b['study']} needs about {num(inv(mid))}× more compute ({unit}) than "
                f"{a['study']} to reach the target {rng(inv(hi), inv(lo))}"), band
    return f"no clear difference between {a['study']} and {b['study']} {rng(lo, hi)}", band


def _summary(pool, target) -> dict:
    loss, n = pool["loss"], pool["loss"].size
    ns = np.unique(np.geomspace(1, n, min(n, 40)).round().astype(int))
    lo, hi = bootstrap_band(loss, ns)
    hits = int((loss <= target).sum())
    cost, unit = _cost(pool)
    return {"study": pool["study"], "sampler": pool["sampler"], "trials": n,
            "random_control": pool["sampler"] == "random", "shares": pool["shares"],
            "best": float(loss.min()), "n": ns.tolist(),
            "expected_best": expected_best_curve(loss, ns=ns).tolist(),
            "expected_best_unbiased": expected_best_curve(loss, True, ns=ns).tolist(),
            "band": [lo.tolist(), hi.tolist()],
            "expected_epochs": (ns * pool["epochs"].mean()).tolist(),
            "expected_cpu_hours": (ns * pool["cpu_hours"].mean()).tolist(),
            "cost_unit": unit, "mean_cost": float(cost.mean()),
            "hits": hits, "hit_rate": hits / n, "hit_interval": list(wilson_interval(hits, n)),
            "to_first_hit": trials_to_hit(hits / n)}


def _markdown(res) -> str:
    rows = ["## Search spaces side by side", "",
            f"Target loss: {res['target']:.3g} ({res['target_rule']}).", "",
            "| study | sampler | trials | best | hit rate (95% Wilson) | trials to a hit "
            "(mean / 95%) | rejected | diverged | pruned |", "|" + "---|" * 9]
    for s in res["studies"]:
        lo, hi = s["hit_interval"]
        t = s["to_first_hit"]
        ctrl = " (random control)" if s["random_control"] else ""
        rows.append(f"| {s['study']} | {s['sampler']}{ctrl} | {s['trials']} | {s['best']:.3g} | "
                    f"{s['hit_rate']:.0%} ({lo:.0%}–{hi:.0%}) | {t['mean']:.3g} / "
                    f"{t['for_confidence']:.3g} | {s['shares']['rejected']:.0%} | "
                    f"{s['shares']['diverged']:.0%} | {s['shares']['pruned']:.0%} |")
    rows += ["", "**Verdicts**", ""] + [f"- {v['text']}" for v in res["verdicts"]]
    for d in res["space_diffs"]:
        rows += ["", f"**Space of {d['b']} against {d['a']}**", ""]
        rows += [f"- {kind}: " + ", ".join(e["name"] for e in entries)
                 for kind, entries in d["diff"].items() if entries] or ["- same space"]
    rows += [""] + [f"> {w}\n" for w in res["warnings"]] + [_INDEPENDENCE, "", SAFETY]
    return "\n".join(rows) + "\n"


def _plots(res, out_dir: Path) -> list[str]:
    cost_key = "expected_cpu_hours" if all(
        s["cost_unit"] == "CPU-hours" for s in res["studies"]) else "expected_epochs"
    label = lambda s: s["study"] + (" (random control)" if s["random_control"] else "")
    axis = "expected CPU-hours" if cost_key == "expected_cpu_hours" else "expected epochs"
    files = [
        plot_lines([(label(s), s["n"], s["expected_best"], *s["band"]) for s in res["studies"]],
                   out_dir / "expected-best-trials.png",
                   "expected best loss vs trials (band: approximate 90% bootstrap)",
                   "trials", "expected best validation loss", logx=True),
        plot_lines([(label(s), s[cost_key], s["expected_best"], None, None)
                    for s in res["studies"]], out_dir / "expected-best-compute.png",
                   "expected best loss vs compute", axis,
                   "expected best validation loss", logx=True),
        plot_bars([s["study"] for s in res["studies"]], [s["hit_rate"] for s in res["studies"]],
                  out_dir / "hit-rates.png", f"share of trials at or below {res['target']:.3g}",
                  "hit rate")]
    return [str(f) for f in files]


def compare(studies, target: float | None = None, force: bool = False, out_dir=None) -> dict:
    """Compare search spaces by expected best loss against trials and compute.

    Args:
        studies: list of ``(Study, optuna.Study)``; the first is the baseline.
        target: loss counted as a hit (default: best of all studies × 10).
        force: compare even when tasks or data differ (warnings are added).
        out_dir: where ``compare.json``, ``compare.md`` and PNGs go (None: nothing written).

    Raises:
        UserError: fewer than two studies, a study without trials, or incomparable studies
            without ``force``.
    """
    if len(studies) < 2:
        raise UserError.single(f"compare needs at least two studies, got {len(studies)}")
    pools = [_pool(s, o) for s, o in studies]
    empty = [p["study"] for p in pools if not np.isfinite(p["loss"]).any()]
    if empty:
        raise UserError.single(f"every study must hold at least one trial with a loss; "
                               f"none in {', '.join(empty)}")
    warnings = check_comparable([s for s, _ in studies], [p["hashes"] for p in pools], force)
    ceiling = max(float(np.nanmax(np.where(np.isfinite(p["loss"]), p["loss"], np.nan)))
                  for p in pools)
    for p in pools:
        p["loss"] = np.where(np.isfinite(p["loss"]), p["loss"], ceiling)
    best = min(float(p["loss"].min()) for p in pools)
    rule = "given" if target is not None else "best of all studies × 10"
    target = float(target) if target is not None else best * 10
    res = {"target": target, "target_rule": rule, "studies": [_summary(p, target) for p in pools],
           "warnings": warnings, "verdicts": [], "space_diffs": [], "note": _INDEPENDENCE,
           "files": []}
    for (sb, _), pb in zip(studies[1:], pools[1:]):
        text, band = _verdict(pools[0], pb, target, _cost(pb)[1])
        res["verdicts"].append({"a": pools[0]["study"], "b": pb["study"], "text": text,
                                "ratio_interval": band})
        res["space_diffs"].append({"a": pools[0]["study"], "b": pb["study"],
                                   "diff": space_diff(studies[0][0], sb)})
    res["markdown"] = _markdown(res)
    if out_dir is not None:
        out_dir = ensure_folder(out_dir, "out_dir")
        res["files"] = _plots(res, out_dir)
        (out_dir / "compare.md").write_text(res["markdown"])
        res["files"] += [str(out_dir / "compare.md"), str(out_dir / "compare.json")]
        (out_dir / "compare.json").write_text(dumps(res))
    return res
