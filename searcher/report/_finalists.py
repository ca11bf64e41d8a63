"""Which configurations the dossier re-trains: the finalists and one non-equivariant control.

Finalists are the best trials (by best validation loss) of the analysis' good group; without
a good group, the best trials overall.  The control is the best trial of a baseline family;
a study that never tried one gets its fixed configuration with ``model.family: coord_mlp``.
"""
from __future__ import annotations

import copy
import math
from dataclasses import dataclass

__all__ = ["BASELINES", "Candidate", "choose_finalists"]

BASELINES = ("node_mlp", "coord_mlp")
# Outcomes whose best validation loss is a real measurement of the configuration.
MEASURED = ("completed", "pruned", "timeout")


@dataclass
class Candidate:
    """One configuration to re-train.

    Attributes:
        label: our short name in the dossier (F1, F2, ... and C for the control).
        role: "finalist" or "control".
        origin: plain words on where it came from ("trial 7", "the study's fixed config").
        trial: Optuna trial number, None when not from a trial.
        search_value: its search-time best validation loss (None when not searched).
        config: resolved configuration.
    """

    label: str
    role: str
    origin: str
    trial: int | None
    search_value: float | None
    config: dict


def _rankable(records) -> list:
    return sorted((r for r in records if r.outcome in MEASURED and r.config
                   and math.isfinite(r.best_value)), key=lambda r: r.best_value)


def choose_finalists(study, records, analysis: dict | None, k: int) -> tuple[list[Candidate], list[str]]:
    """Pick ``k`` finalists and the control.

    Args:
        study: the :class:`searcher.spec.Study` (its ``fixed()`` config seeds a control).
        records: ``searcher.analysis.read_trials(store)``.
        analysis: result of ``searcher.analysis.analyze`` (reads ``good_group``), or None.
        k: number of finalists.

    Returns:
        ``(candidates, notes)``: finalists F1..Fk then the control C; notes say what was
        substituted and why.

    Raises:
        UserError: the store holds no measured trial to choose from.
    """
    from searcher.errors import UserError
    from searcher.spec import config_hash

    notes = []
    ranked = _rankable(records)
    if not ranked:
        raise UserError.single(
            f"study {study.name!r} has no completed or pruned trial with a configuration; "
            "run the search first (`searcher run`)", file=str(study.path))
    good = (analysis or {}).get("good_group")
    pool = [r for r in ranked if r.config["model"]["family"] not in BASELINES]
    if good:
        members = set(good["trials"])
        pool = [r for r in pool if r.number in members] or pool
        source = f"good group '{good['label']}'"
    else:
        source = "best validation loss (no good group was found)"
        notes.append("No good group in the analysis: finalists are the best trials by value.")
    if not pool:
        pool = [r for r in ranked if r.config["model"]["family"] not in BASELINES] or ranked
    chosen, seen = [], set()
    for r in pool:
        digest = config_hash(r.config)
        if digest not in seen:      # the same configuration sampled twice counts once
            seen.add(digest)
            chosen.append(r)
        if len(chosen) == k:
            break
    if len(chosen) < k:
        notes.append(f"Only {len(chosen)} distinct finalist(s) available from the {source}.")
    out = [Candidate(f"F{i + 1}", "finalist", f"trial {r.number}, {source}", r.number,
                     r.best_value, copy.deepcopy(r.config)) for i, r in enumerate(chosen)]
    # The fair control: the first finalist's own configuration (inputs, target, depth,
    # training) with the message-passing baseline family on raw Cartesian components.
    base = out[0].config if out else study.fixed()
    cfg = copy.deepcopy(base)
    cfg["model"]["family"] = "coord_mlp"
    origin = (f"{out[0].label}'s configuration as coord_mlp" if out else
              "the study's fixed config as coord_mlp")
    out.append(Candidate("C", "control", origin, None, None, cfg))
    return out, notes
