"""``analyze``: read a finished study and say which configurations behaved well and why."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import optuna

from searcher.analysis._curves import find_groups
from searcher.analysis._importance import importances
from searcher.analysis._json import dumps
from searcher.analysis._plots import plot_bars, plot_curves
from searcher.analysis._records import count_outcomes, read_trials
from searcher.analysis._traits import enrichment, trait_rules
from searcher.errors import ensure_folder

__all__ = ["MIN_TRIALS", "SAFETY", "analyze", "find_parent_run"]

MIN_TRIALS = 8   # below this, groups and traits would be noise
SAFETY = ("Results only rank configurations on this study's data: a learned closure must be "
          "validated against experiments or trusted simulations before it steers a design, "
          "and local codes and licensed engineering practice prevail.")
_SHOWN = 5


def _study_name(study_obj, optuna_study) -> str:
    return getattr(study_obj, "name", None) or optuna_study.study_name


def _groups(records, found) -> list[dict]:
    labels = np.array(found.labels)
    out = []
    for label in dict.fromkeys(sorted(found.labels, key=lambda l: np.median(
            found.features[labels == l, 1]))):
        members = labels == label
        out.append({"label": label, "size": int(members.sum()),
                    "trials": [records[i].number for i in np.flatnonzero(members)],
                    "final_median": float(10 ** np.median(found.features[members, 0])),
                    "best_median": float(10 ** np.median(found.features[members, 1]))})
    return out


def _summary(res: dict) -> str:
    counts = ", ".join(f"{v} {k}" for k, v in res["counts"].items() if v)
    lines = [f"Study {res['study']}: {res['trials']} trials ({counts or 'none finished'})"]
    if res["message"]:
        lines.append(res["message"])
    if res["groups"]:
        lines.append(f"Curve groups ({sum(g['size'] for g in res['groups'])} curves):")
        lines += [f"  {g['label']:<20} {g['size']:>5}   best median {g['best_median']:.3g}"
                  f"   final median {g['final_median']:.3g}" for g in res["groups"]]
    good = res["good_group"]
    if good:
        shown = ", ".join(f"#{n}" for n in good["trials"][:_SHOWN])
        more = " ..." if good["size"] > _SHOWN else ""
        lines.append(f"Good group: '{good['label']}', {good['size']} trials ({shown}{more}); "
                     f"rule: {good['rule']}; a curve joins it at best loss <= "
                     f"{good['threshold']:.3g}")
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


def _plots(res, curved, found, out_dir: Path) -> list[Path]:
    order = [g["label"] for g in res["groups"]]
    files = [plot_curves([r.curve for r in curved], found.labels, order,
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

    client = MlflowClient(tracking_uri=tracking_uri)
    ids = [e.experiment_id for e in client.search_experiments()]
    if not ids:
        return None
    runs = client.search_runs(
        ids, filter_string=f"tags.`searcher.role` = 'study' and "
                           f"tags.`searcher.study` = '{study_name}'",
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
        (label, trials, size, final_median, best_median), ``good_group`` (or None),
        ``traits``, ``rules``, ``importance``, ``message``, ``files``, ``summary`` (text).
    """
    out_dir = ensure_folder(out_dir, "out_dir")
    records = read_trials(optuna_study)
    curved = [r for r in records if r.has_curve]
    res = {"study": _study_name(study_obj, optuna_study), "trials": len(records),
           "counts": count_outcomes(records), "curves": len(curved), "groups": [],
           "good_group": None, "traits": [], "rules": [],
           "importance": {"reaching_top": {}, "global_variance": {}, "note": ""},
           "message": "", "files": [], "parent_run": None, "safety": SAFETY}
    if len(curved) < MIN_TRIALS:
        failed = sum(res["counts"][k] for k in ("failed", "rejected", "interrupted"))
        res["message"] = (f"every trial failed or was rejected ({failed} of {len(records)}); "
                          "nothing to group" if records and failed == len(records) else
                          f"only {len(curved)} trials with a validation curve; at least "
                          f"{MIN_TRIALS} are needed to form groups, so none are claimed")
    else:
        found = find_groups([r.curve for r in curved])
        res["groups"] = _groups(curved, found)
        in_group = np.array([lab == found.good for lab in found.labels])
        if found.good:
            members = next(g for g in res["groups"] if g["label"] == found.good)
            res["good_group"] = {"label": found.good, "rule": found.rule,
                                 "threshold": float(10 ** found.good_threshold),
                                 "size": members["size"], "trials": members["trials"]}
            res["traits"] = enrichment(curved, in_group)
            res["rules"] = trait_rules(curved, in_group, found.good)
        else:
            res["message"] = found.note
        share = in_group.mean() if found.good else 0.1
        res["importance"] = importances(records, share)
        res["files"] = [str(p) for p in _plots(res, curved, found, out_dir)]
    json_path = out_dir / "analysis.json"
    res["files"].insert(0, str(json_path))
    res["summary"] = _summary(res)
    json_path.write_text(dumps(res))
    if mlflow_uri:
        res["parent_run"] = _log_to_parent(mlflow_uri, res["study"],
                                           [Path(f) for f in res["files"]])
    return res

