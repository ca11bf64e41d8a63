"""``make_dossier``: choose finalists, re-train them over seeds, weigh the evidence, write it.

Output folder (default ``<output>/dossier``): ``dossier.html`` (self-contained),
``dossier.md``, ``dossier.json``, ``plots/*.png``, and the choice as ``choice.yaml`` +
``choice.pt`` (+ ``choice-normaliser.json``), reloadable with ``searcher.load_model``.
"""
from __future__ import annotations

import copy
import math
import tempfile
from pathlib import Path

__all__ = ["QUICK", "dossier_settings", "make_dossier"]

# --quick: enough to rehearse the whole dossier on the demo within its budget.
QUICK = {"finalists": 2, "seeds": 2, "epoch_factor": 1}
# 6 paired seeds: a verdict needs at least 5 (report._stats.MIN_SEEDS), and even a clean
# sweep of 5 leaves the exact interval's lower bound at 0.025^(1/5) ≈ 0.478 < 0.5, so the
# fewest seeds that can decide a win is 6 (0.025^(1/6) ≈ 0.541; derived, Clopper–Pearson).
DEFAULT = {"finalists": 3, "seeds": 6, "epoch_factor": 1}
CONFIDENCE = 0.95


def dossier_settings(study, *, finalists: int | None = None, seeds: int | None = None,
                     epochs: int | None = None, quick: bool = False) -> dict:
    """Resolved dossier settings; explicit values win over ``quick`` and the defaults.

    Raises:
        UserError: a count below 1.
    """
    from searcher.errors import UserError

    base = QUICK if quick else DEFAULT
    study_epochs = int(study.fixed()["training"]["epochs"])
    out = {"finalists": base["finalists"] if finalists is None else int(finalists),
           "seeds": base["seeds"] if seeds is None else int(seeds),
           "epochs": base["epoch_factor"] * study_epochs if epochs is None else int(epochs),
           "quick": bool(quick), "confidence": CONFIDENCE}
    for key in ("finalists", "seeds", "epochs"):
        if out[key] < 1:
            raise UserError.single(f"--{key} must be at least 1, but got {out[key]}",
                                   path=f"dossier.{key}")
    return out


def _exported_config(config: dict, *, seed: int, epochs: int) -> dict:
    """The configuration the exported weights were trained with (full fidelity)."""
    cfg = copy.deepcopy(config)
    cfg["training"].update(seed=seed, epochs=epochs, device="auto")
    cfg["task"]["fidelity"] = {"train_fraction": 1.0, "probes": 0}
    return cfg


def make_dossier(study, *, finalists: int | None = None, seeds: int | None = None,
                 epochs: int | None = None, out: Path | str | None = None, quick: bool = False,
                 storage: str | None = None, progress=None) -> dict:
    """Build the evidence dossier of a finished study.

    Args:
        study: the :class:`searcher.spec.Study`.
        finalists: finalists to re-train (default 3; 2 with ``quick``).
        seeds: seeds per finalist (default 6; 2 with ``quick``).
        epochs: epochs per re-run (default twice the study's; the study's with ``quick``).
        out: dossier folder (default ``<output>/dossier``).
        quick: reduced settings for the demo.
        storage: Optuna storage URL overriding the study's (as for ``searcher run``).
        progress: optional ``callable(str)`` told about each re-run.

    Returns:
        The dossier content (what ``dossier.json`` holds).

    Raises:
        UserError: bad settings, no study (or no trial) in the store, no measured trial, or
            a dossier folder that cannot be written.  Nothing is created before these checks:
            the store is only read, and the folder is made once the study is known to exist.
    """
    from searcher.analysis import analyze, read_trials
    from searcher.errors import UserError, ensure_folder
    from searcher.report._content import assemble, summarise_finalist
    from searcher.report._export import export_choice
    from searcher.report._finalists import (choose_finalists, fair_control,
                                            tensor_basis_reference)
    from searcher.report._front import time_trials
    from searcher.report._pick import decide
    from searcher.report._references import learned_row, score_references
    from searcher.report._provenance import now_utc, provenance
    from searcher.report._finalist_measure import retrain
    from searcher.report._tracking import DossierTracker
    from searcher.report._writers import FILES, plot_files, write_dossier
    from searcher.search import public_config, read_store, storage_label
    from searcher.train import pick_device

    started = now_utc()
    settings = dossier_settings(study, finalists=finalists, seeds=seeds, epochs=epochs,
                                quick=quick)
    store = read_store(study, storage)
    if not store.trials:
        raise UserError.single(f"the study {study.name!r} must have trials for a dossier, but "
                               f"{storage_label(study, storage)} holds none (run the study "
                               "first)", file=str(study.path))
    folder = ensure_folder(out, "--out") if out else ensure_folder(
        Path(study.output_dir) / "dossier", "output.folder", file=str(study.path))
    fixed = study.fixed()
    with tempfile.TemporaryDirectory() as scratch:  # analysis' own files are not ours to keep
        analysis = analyze(study, store, scratch)
    trial_records = read_trials(store)
    candidates, notes = choose_finalists(study, trial_records, analysis,
                                         settings["finalists"])
    tracker = DossierTracker(study)
    notes += [tracker.note] if tracker.note else []
    seed_list = [int(fixed["training"]["seed"]) + i for i in range(settings["seeds"])]
    settings["seed_list"] = seed_list
    settings["device"] = str(pick_device({"device": "auto"}))
    keep, data = {}, {}

    def run(cand) -> dict:
        fin = {"label": cand.label, "role": cand.role, "origin": cand.origin,
               "trial": cand.trial, "search_value": cand.search_value,
               "config": public_config(cand.config), "seeds": []}
        for seed in seed_list:
            rec, model, dataset = retrain(study, cand.config, seed=seed,
                                          epochs=settings["epochs"])
            fin["cost"] = rec.pop("cost")
            fin["equivariant"] = bool(getattr(model, "equivariant", True))
            rec["mlflow_run_id"] = tracker.record(cand.label, cand.config, rec)
            fin["seeds"].append(rec)
            data["dataset"] = dataset
            best = keep.get(cand.label)
            if math.isfinite(rec["best_value"]) and (best is None
                                                      or rec["best_value"] < best[0]):
                # The exported weights: the seed with the best validation loss (never test).
                keep[cand.label] = (rec["best_value"], seed,
                                    {k: v.detach().cpu().clone()
                                     for k, v in model.state_dict().items()},
                                    dataset.normaliser.to_dict())
            if progress:
                progress(f"{cand.label} seed {seed}: {rec['status']}, test error "
                         f"{rec['error']:.4g}, {rec['cpu_seconds']:.1f} CPU-s")
        return fin

    records = [run(c) for c in candidates]
    # The control and the learned reference are built on the pick, so it is decided first.
    summed = [summarise_finalist(f, confidence=settings["confidence"]) for f in records]
    pick = next(c for c in candidates if c.label == decide(summed)[0]["label"])
    dataset = data["dataset"]
    params = int(next(f for f in records if f["label"] == pick.label)["cost"]["params"])
    control = fair_control(pick, params, dataset.fields, dataset.target.name, None,
                           list(fixed["task"]["split"]["stress"]))
    tensor_basis = tensor_basis_reference(pick, dataset.fields)
    candidates += [control] + ([tensor_basis] if tensor_basis else [])
    records.append(run(control))
    learned = [run(tensor_basis)] if tensor_basis else []
    baselines = score_references(dataset) + [learned_row(f) for f in learned]
    trials = time_trials(trial_records, dataset)
    files = {**FILES, "plots": plot_files()}
    summary = fixed["study"]
    content = assemble(
        study={"name": study.name, "summary": summary["summary"], "team": summary["team"],
               "path": str(study.path), "hash": study.hash},
        settings=settings, finalists=records, files=files, warnings=notes,
        baselines=baselines, learned=learned, trials=trials,
        provenance=provenance(study_path=study.path, study_hash=study.hash,
                              data_hash=dataset.hash, started=started,
                              device=settings["device"]))
    label = content["pick"]["label"]
    chosen = next(c for c in candidates if c.label == label)
    if label in keep:
        _, seed, state, normaliser = keep[label]
        export_choice(folder, _exported_config(chosen.config, seed=seed,
                                               epochs=settings["epochs"]), state,
                      name=f"{study.name}-choice",
                      summary=f"Dossier choice {label} of study {study.name} (seed {seed})",
                      normaliser=normaliser, yaml_name=files["config"],
                      weights_name=files["weights"])
        content["pick"]["seed"] = seed
    else:
        for key in ("config", "weights", "normaliser"):
            files.pop(key)
        content["cautions"].append(f"{label} has no finite validation loss: no model exported.")
    content["provenance"]["finished"] = now_utc()
    write_dossier(content, folder)
    content["folder"] = str(folder)
    return content
