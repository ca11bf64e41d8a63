"""``analyze``: read a finished study and say which configurations behaved well and why."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import optuna

from searcher.analysis._curves import GOOD_LABEL, find_groups
from searcher.analysis._importance import importances
from searcher.analysis._json import dumps
from searcher.analysis._placing import forecast_best
from searcher.analysis._plots import plot_bars, plot_curves
from searcher.analysis._rarity import SPACE_DRAWS, random_drawn, rarity
from searcher.analysis._records import count_outcomes, read_trials
from searcher.analysis._traits import enrichment, trait_rules
from searcher.errors import ensure_folder

__all__ = ["MIN_TRIALS", "SAFETY", "analyze", "find_parent_run", "place_curves",
           "BLOWN_LABEL", "CUT_LABEL", "CUT_ABOVE_LABEL", "UNDECIDED_LABEL"]

MIN_TRIALS = 8   # finished curves below which groups and traits would be noise
# Outcomes whose curve ran to its planned end (or its time limit): their best level is final.
FINISHED = ("completed", "timeout")
BLOWN_LABEL = "blows up"
CUT_LABEL = "cut early"
CUT_ABOVE_LABEL = "cut, forecast above the good level"
UNDECIDED_LABEL = "cut, undecided"
SAFETY = ("Results only rank configurations on this study's data: a learned closure must be "
          "validated against experiments or trusted simulations before it steers a design, "
          "and local codes and licensed engineering practice prevail.")
_SHOWN = 5


def _study_name(study_obj, optuna_study) -> str:
    return getattr(study_obj, "name", None) or optuna_study.study_name


def place_curves(curved) -> tuple[list[str], np.ndarray, dict, object]:
    """Label every curve on comparable evidence.

    Finished curves (:data:`FINISHED`) are grouped by :func:`find_groups`, which decides the
    good group and its threshold; diverged ones are labelled :data:`BLOWN_LABEL`; cut ones
    (pruned, interrupted) join the good group only when their whole forecast interval lies
    at or below the threshold, are labelled :data:`CUT_ABOVE_LABEL` when it lies above, and
    :data:`UNDECIDED_LABEL` otherwise (also when they cannot be placed).

    Returns:
        labels, levels (log10 best level, forecast median for cut curves, NaN when not
        placed), ``{trial number: forecast dict}``, and the finished curves' CurveGroups.
    """
    finished = [i for i, r in enumerate(curved) if r.outcome in FINISHED]
    found = find_groups([curved[i].curve for i in finished],
                        drawn=[random_drawn(curved[i]) for i in finished])
    labels = [""] * len(curved)
    levels = np.full(len(curved), np.nan)
    for i, label, feats in zip(finished, found.labels, found.features):
        labels[i], levels[i] = label, feats[1]
    references = [curved[i].curve for i in finished]
    forecasts = {}
    for i, rec in enumerate(curved):
        if labels[i]:
            continue
        if rec.outcome == "diverged":
            labels[i] = BLOWN_LABEL
            finite = rec.curve[np.isfinite(rec.curve) & (rec.curve > 0)]
            levels[i] = np.log10(finite.min()) if finite.size else np.nan
            continue
        fc = forecast_best(rec.curve, references)
        if fc is None or found.good_threshold is None:
            labels[i] = UNDECIDED_LABEL if found.good_threshold is not None else CUT_LABEL
        else:
            forecasts[rec.number] = {"level": fc.level, "low": fc.low, "high": fc.high,
                                     "lookalikes": fc.lookalikes}
            levels[i] = fc.level
            labels[i] = (GOOD_LABEL if fc.high <= found.good_threshold else
                         CUT_ABOVE_LABEL if fc.low > found.good_threshold else UNDECIDED_LABEL)
    return labels, levels, forecasts, found


def _groups(records, labels, levels) -> list[dict]:
    labels = np.array(labels)
    finals = np.array([np.log10(max(float(r.curve[-1]), 1e-300))
                       if np.isfinite(r.curve[-1]) else np.inf for r in records])
    out = []
    def median_level(lab):
        vals = levels[labels == lab]
        vals = vals[np.isfinite(vals)]
        return float(np.median(vals)) if vals.size else np.inf
    for label in sorted(set(labels), key=median_level):
        members = labels == label
        best = median_level(label)
        out.append({"label": label, "size": int(members.sum()),
                    "trials": [records[i].number for i in np.flatnonzero(members)],
                    "final_median": float(10 ** np.median(finals[members])),
                    "best_median": float(10 ** best) if np.isfinite(best) else None})
    return out


def _summary(res: dict) -> str:
    counts = ", ".join(f"{v} {k}" for k, v in res["counts"].items() if v)
    lines = [f"Study {res['study']}: {res['trials']} trials ({counts or 'none finished'})"]
    if res["message"]:
        lines.append(res["message"])
    if res["groups"]:
        lines.append(f"Curve groups ({sum(g['size'] for g in res['groups'])} curves):")
        lines += [f"  {g['label']:<34} {g['size']:>5}   best median "
                  + (f"{g['best_median']:.3g}" if g["best_median"] is not None else "n/a")
                  + f"   final median {g['final_median']:.3g}" for g in res["groups"]]
    good = res["good_group"]
    if good:
        shown = ", ".join(f"#{n}" for n in good["trials"][:_SHOWN])
        more = " ..." if good["size"] > _SHOWN else ""
        lines.append(f"Good group: '{good['label']}', {good['size']} trials ({shown}{more}; "
                     f"{len(good['forecast'])} of them cut and placed by forecast); "
                     f"rule: {good['rule']}; a curve joins it at best loss <= "
                     f"{good['threshold']:.3g}")
        lines += _rarity_lines(good["rarity"])
        strong = [t for t in res["traits"] if t["q"] < 0.05][:_SHOWN]
        lines.append("Traits (q < 0.05):" if strong else "Traits: none with q < 0.05")
        for t in strong:
            if t["kind"] == "choice":
                lines.append(f"  {t['parameter']} = {t['value']}: {t['in_group']:.0%} of the "
                             f"group vs {t['overall']:.0%} overall (p={t['p']:.2g}, "
                             f"q={t['q']:.2g})")
            else:
                lines.append(f"  {t['parameter']} in {t['value']} in the group, median "
                             f"{t['in_group']:g} vs {t['overall']:g} (U/nm={t['effect']:.2f}, "
                             f"q={t['q']:.2g})")
        lines += ["Rules:"] + [f"  {r['rule']}" for r in res["rules"]] if res["rules"] else []
    imp = res["importance"]
    for key, title in (("reaching_top", "Importance for reaching the top (PED-ANOVA, top "
                        f"{imp.get('top_quantile', 0):.0%})"),
                       ("global_variance", "Importance for the global variance (fANOVA)")):
        if imp.get(key):
            top = ", ".join(f"{k} {v:.2f}" for k, v in list(imp[key].items())[:_SHOWN])
            lines.append(f"{title}: {top}")
    if imp.get("note"):
        lines.append(imp["note"])
    if res["files"]:
        lines.append("Files: " + ", ".join(res["files"]))
    lines.append(SAFETY)
    return "\n".join(lines)


def _pct(d: dict) -> str:
    lo, hi = d["interval"]
    return f"{d['share']:.0%} ({d['good']} of {d['of']}; exact 95% interval {lo:.0%}-{hi:.0%})"


def _rarity_lines(r: dict) -> list[str]:
    lines = [f"Rarity among the trials: {_pct(r['of_trials'])}"
             + (f"; {r['undecided']} cut trials undecided" if r["undecided"] else "")]
    space = r["of_space"]
    if space["random_trials"]:
        lines.append(f"Rarity in the space, trials drawn at random: "
                     f"{_pct(space['random_trials'])}")
    elif space["note"]:
        lines.append(f"Rarity in the space: {space['note']}")
    if space["model"]:
        lines.append(f"Rarity in the space, model estimate: {space['model']['share']:.0%} "
                     f"({space['model']['what']}, {space['model']['draws']} draws)")
    return lines


def _space_draws(study_obj, k: int) -> list[dict] | None:
    """``k`` parameter sets drawn at random from the study's space (None without a study)."""
    if study_obj is None or not hasattr(study_obj, "suggest"):
        return None
    draw = optuna.create_study(sampler=optuna.samplers.RandomSampler(seed=0))
    out = []
    for _ in range(k):
        trial = draw.ask()
        study_obj.suggest(trial)
        out.append(dict(trial.params))
        draw.tell(trial, 0.0)
    return out


def _plots(res, curved, labels, out_dir: Path) -> list[Path]:
    order = [g["label"] for g in res["groups"]]
    files = [plot_curves([r.curve for r in curved], labels, order,
                         out_dir / "curve-groups.png", f"{res['study']}: curves by group")]
    choice = [t for t in res["traits"] if t["kind"] == "choice"][:12]
    if choice:
        files.append(plot_bars([f"{t['parameter']} = {t['value']}" for t in choice],
                               [t["in_group"] for t in choice], out_dir / "traits.png",
                               f"share in '{res['good_group']['label']}' vs overall",
                               "fraction of trials",
                               second=([t["overall"] for t in choice], "overall",
                                       "in the good group")))
    imp = res["importance"]
    if imp["global_variance"] or imp["reaching_top"]:
        names = list(dict.fromkeys(list(imp["reaching_top"]) + list(imp["global_variance"])))
        files.append(plot_bars(names, [imp["reaching_top"].get(n, 0.0) for n in names],
                               out_dir / "importance.png", "parameter importance",
                               "normalised importance",
                               second=([imp["global_variance"].get(n, 0.0) for n in names],
                                       "global variance (fANOVA)",
                                       "reaching the top (PED-ANOVA)")))
    return files


def find_parent_run(tracking_uri: str, study_name: str) -> str | None:
    """Run id of the study's parent MLflow run (tags ``searcher.role = study`` and
    ``searcher.study = <name>``), or None when the tracker holds none."""
    from mlflow.tracking import MlflowClient

    from searcher.outcomes import STUDY_ROLE, TAGS

    client = MlflowClient(tracking_uri=tracking_uri)
    ids = [e.experiment_id for e in client.search_experiments()]
    if not ids:
        return None
    runs = client.search_runs(
        ids, filter_string=f"tags.`{TAGS['role']}` = '{STUDY_ROLE}' and "
                           f"tags.`{TAGS['study']}` = '{study_name}'",
        order_by=["attributes.start_time ASC"], max_results=1)
    return runs[0].info.run_id if runs else None


def _log_to_parent(uri: str, name: str, files: list[Path]) -> str | None:
    from mlflow.tracking import MlflowClient

    run_id = find_parent_run(uri, name)
    if run_id:
        client = MlflowClient(tracking_uri=uri)
        for path in files:
            client.log_artifact(run_id, str(path), artifact_path="analysis")
    return run_id


def analyze(study_obj, optuna_study: optuna.Study, out_dir, mlflow_uri: str | None = None
            ) -> dict:
    """Group the study's curves, name the good group, find its traits, rank importance.

    Args:
        study_obj: the :class:`searcher.spec.Study` (only ``.name`` is read; None = the
            store's study name).
        optuna_study: the study's store.
        out_dir: folder for ``analysis.json`` and the PNG charts (created first, so that a
            folder that cannot be written fails before any work).
        mlflow_uri: tracking URI; when given and the study's parent run is found there, the
            JSON and PNGs are logged to it under ``analysis/``.

    Returns:
        JSON-ready dict with ``study``, ``trials``, ``counts`` (by outcome), ``groups``
        (label, trials, size, final_median, best_median), ``good_group`` (or None; with
        ``forecast`` and ``undecided`` trial lists and ``rarity``, see
        :func:`searcher.analysis._rarity.rarity`), ``forecasts`` (trial number -> forecast
        of a cut curve), ``traits``, ``rules``, ``importance``, ``message``, ``files``, ``summary`` (text).
    """
    out_dir = ensure_folder(out_dir, "out_dir")
    records = read_trials(optuna_study)
    curved = [r for r in records if r.has_curve]
    res = {"study": _study_name(study_obj, optuna_study), "trials": len(records),
           "counts": count_outcomes(records), "curves": len(curved), "groups": [],
           "good_group": None, "forecasts": {}, "traits": [], "rules": [],
           "importance": {"reaching_top": {}, "global_variance": {}, "note": ""},
           "message": "", "files": [], "parent_run": None, "safety": SAFETY}
    n_finished = sum(r.outcome in FINISHED for r in curved)
    if n_finished < MIN_TRIALS:
        failed = sum(res["counts"][k] for k in ("failed", "rejected", "interrupted"))
        res["message"] = (f"every trial failed or was rejected ({failed} of {len(records)}); "
                          "nothing to group" if records and failed == len(records) else
                          f"only {n_finished} trials ran their planned epochs; at least "
                          f"{MIN_TRIALS} are needed to form groups, so none are claimed")
    else:
        labels, levels, forecasts, found = place_curves(curved)
        res["groups"] = _groups(curved, labels, levels)
        res["forecasts"] = forecasts
        placed = [i for i, lab in enumerate(labels) if lab != UNDECIDED_LABEL]
        kept = [curved[i] for i in placed]
        in_group = np.array([labels[i] == GOOD_LABEL for i in placed], dtype=bool)
        if found.good:
            members = [curved[i].number for i in placed if labels[i] == GOOD_LABEL]
            undecided = [r.number for r, lab in zip(curved, labels) if lab == UNDECIDED_LABEL]
            res["good_group"] = {
                "label": found.good, "rule": found.rule,
                "threshold": float(10 ** found.good_threshold), "size": len(members),
                "trials": members,
                "forecast": [n for n in members if n in forecasts],
                "undecided": undecided,
                "rarity": rarity(kept, in_group, len(undecided),
                                 _space_draws(study_obj, SPACE_DRAWS))}
            res["traits"] = enrichment(kept, in_group)
            res["rules"] = trait_rules(kept, in_group, found.good)
        else:
            res["message"] = found.note
        share = in_group.mean() if found.good else 0.1
        res["importance"] = importances(records, share)
        res["files"] = [str(p) for p in _plots(res, curved, labels, out_dir)]
    json_path = out_dir / "analysis.json"
    res["files"].insert(0, str(json_path))
    res["summary"] = _summary(res)
    json_path.write_text(dumps(res))
    if mlflow_uri:
        res["parent_run"] = _log_to_parent(mlflow_uri, res["study"],
                                           [Path(f) for f in res["files"]])
    return res

