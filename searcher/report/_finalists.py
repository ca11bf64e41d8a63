"""Which configurations the dossier re-trains: the finalists, a fair control, learned references.

Finalists are the best trials (by best validation loss) of the analysis' good group; without
a good group, the best trials overall.

The control is built once the pick is known (:func:`fair_control`): the pick's own
configuration (inputs, target, depth, training) with the plain message-passing baseline
``coord_mlp`` on raw Cartesian components, its width set so that its parameter count is
the nearest to the pick's, trained on random frames (rotations, plus reflections when the
study tests them).  That is the competitor a reviewer asks for: same information, same size,
symmetry learned from augmentation instead of built in.

The tensor-basis network (:func:`tensor_basis_reference`) is a learned reference for closure
tasks whose inputs include a strain rate and a rotation (vorticity) field.
"""
from __future__ import annotations

import copy
import math
from dataclasses import dataclass

__all__ = ["BASELINES", "Candidate", "choose_finalists", "fair_control", "matched_width",
           "tensor_basis_reference"]

# Families that are never finalists: the non-equivariant baselines and the learned reference.
BASELINES = ("node_mlp", "coord_mlp", "tensor_basis")
# Ling, Kurzawski & Templeton (2016) trained 8 hidden layers of 30 units.
TBNN_LAYERS, TBNN_WIDTH = 8, 30
# Preferred (strain, rotation) input pairs for the tensor-basis reference, in order.
TBNN_PAIRS = (("scaled_strain", "scaled_vorticity"), ("strain_rate", "vorticity"))
# Outcomes whose best validation loss is a real measurement of the configuration.
MEASURED = ("completed", "pruned", "timeout")


@dataclass
class Candidate:
    """One configuration to re-train.

    Attributes:
        label: our short name in the dossier (F1, F2, ... and C for the control).
        role: "finalist", "control" or "reference".
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
    return out, notes


def _params(model_cfg: dict, fields: dict, target: str, stats: dict | None) -> int:
    from searcher.models import build_model

    model = build_model(model_cfg, fields, target, stats=stats)
    return sum(p.numel() for p in model.parameters())


def matched_width(model_cfg: dict, params: int, fields: dict, target: str,
                  stats: dict | None = None, *, most: int = 4096) -> tuple[int, int]:
    """The ``model.width`` whose parameter count is nearest to ``params``.

    The count grows with the width, so a bisection finds the crossing.

    Returns:
        ``(width, parameter count at that width)``.
    """
    cfg = copy.deepcopy(model_cfg)

    def count(w: int) -> int:
        cfg["width"] = w
        return _params(cfg, fields, target, stats)

    lo, hi = 1, most
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if count(mid) < params:
            lo = mid
        else:
            hi = mid
    best = min((lo, hi), key=lambda w: abs(count(w) - params))
    return best, count(best)


def fair_control(pick: Candidate, params: int, fields: dict, target: str,
                 stats: dict | None, stress: list[str]) -> Candidate:
    """The non-equivariant control matched to the pick (see the module docstring)."""
    cfg = copy.deepcopy(pick.config)
    model = cfg["model"]
    model["family"] = "coord_mlp"
    model["augment"] = "rotate_reflect" if "reflected" in stress else "rotate"
    model["width"], got = matched_width(model, params, fields, target, stats)
    origin = (f"{pick.label}'s inputs, target, depth and training as coord_mlp, width "
              f"{model['width']} for {got:,} parameters against {params:,}, trained on "
              f"random {'rotations and reflections' if model['augment'] == 'rotate_reflect' else 'rotations'}")
    return Candidate("C", "control", origin, None, None, cfg)


def tensor_basis_reference(pick: Candidate, fields: dict) -> Candidate | None:
    """The tensor-basis network on the pick's task, or None where it does not apply.

    It applies when the target is a node-level traceless symmetric tensor and the data hold a
    strain-rate input (a traceless or symmetric tensor) and a rotation input (an axial
    vector): the pairs of :data:`TBNN_PAIRS` first, else the only such pair.
    """
    from searcher.models._tensor_basis import STRAIN_KINDS

    target = next((f for f in fields.values() if f.role == "target"), None)
    if target is None or target.kind != "traceless_symmetric_tensor" or target.level != "node":
        return None
    inputs = {n: f for n, f in fields.items() if f.role == "input" and f.level == "node"}
    pair = next((p for p in TBNN_PAIRS if all(n in inputs for n in p)
                 and inputs[p[0]].kind in STRAIN_KINDS
                 and inputs[p[1]].kind == "axial_vector"), None)
    if pair is None:
        strains = [n for n, f in inputs.items() if f.kind in STRAIN_KINDS]
        spins = [n for n, f in inputs.items() if f.kind == "axial_vector"]
        if len(strains) != 1 or len(spins) != 1:
            return None
        pair = (strains[0], spins[0])
    cfg = copy.deepcopy(pick.config)
    cfg["model"].update(family="tensor_basis", node_inputs=list(pair), layers=TBNN_LAYERS,
                        width=TBNN_WIDTH, augment="none")
    origin = (f"tensor-basis network (Ling et al. 2016) on {pair[0]} and {pair[1]}, "
              f"{TBNN_LAYERS}×{TBNN_WIDTH}, {pick.label}'s training settings")
    return Candidate("T", "reference", origin, None, None, cfg)
