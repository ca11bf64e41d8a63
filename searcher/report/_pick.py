"""The pick: one stated decision, its reasons in plain words, and what would overturn it.

Rule (ours): among finalists that completed and, if equivariant, passed the gate, order by
mean test error.  The front two meet head to head (P(A>B) over paired seeds).  A clear win
(Bouthillier et al. 2021 criterion) picks the winner; otherwise the evidence does not separate
them and the smaller model (fewer parameters) is taken.  The control never wins the pick — it
is there to show whether equivariance earns its cost.
"""
from __future__ import annotations

import math

from searcher.report._sections import fmt
from searcher.report._stats import Outperform, p_outperform

__all__ = ["decide", "paired_errors"]


def paired_errors(a: dict, b: dict) -> tuple[list[float], list[float]]:
    """Test errors of two finalists on the seeds both ran, in seed order."""
    ea = {s["seed"]: s["error"] for s in a["seeds"]}
    eb = {s["seed"]: s["error"] for s in b["seeds"]}
    common = sorted(set(ea) & set(eb))
    return [ea[s] for s in common], [eb[s] for s in common]


def _usable(fin: dict) -> bool:
    done = [s for s in fin["seeds"] if s["status"] == "completed" and math.isfinite(s["error"])]
    gate_ok = not fin["equivariant"] or all(s["gate_passed"] for s in fin["seeds"])
    return bool(done) and gate_ok


def _worst_stress(fin: dict) -> tuple[str, float]:
    ratios = {n: v["ratio"]["mean"] for n, v in fin["stress"].items()
              if math.isfinite(v["ratio"]["mean"])}
    if not ratios:
        return "", math.nan
    name = max(ratios, key=ratios.get)
    return name, ratios[name]


def decide(finalists: list[dict], *, seed: int = 0) -> tuple[dict, Outperform | None]:
    """Choose among the re-trained finalists.

    Args:
        finalists: finalist content dicts (label, role, equivariant, seeds, metrics, stress,
            cost).
        seed: seeds the bootstrap of P(A>B).

    Returns:
        ``(pick, duel)``: pick has ``label``, ``decision``, ``reasons``, ``would_change``;
        duel is the front two's :class:`Outperform` (None with fewer than two).
    """
    contenders = [f for f in finalists if f["role"] == "finalist" and _usable(f)]
    dropped = [f["label"] for f in finalists if f["role"] == "finalist" and not _usable(f)]
    control = next((f for f in finalists if f["role"] == "control"), None)
    fallback = not contenders
    if fallback:
        contenders = [f for f in finalists if _usable(f)] or finalists
    contenders = sorted(contenders, key=lambda f: (not math.isfinite(f["metrics"]["error"]["mean"]),
                                                   f["metrics"]["error"]["mean"]))
    reasons, change = [], []
    if fallback:
        reasons.append("No finalist is usable, so the best remaining configuration is named; "
                       "treat it as a fallback, not as a finding.")
    if dropped:
        reasons.append(f"Left out {', '.join(dropped)}: no completed seed, or the equivariance "
                       "gate failed after re-training.")
    duel = None
    best = contenders[0]
    chosen = best
    if len(contenders) > 1:
        runner = contenders[1]
        duel = p_outperform(*paired_errors(best, runner), a=best["label"], b=runner["label"],
                            seed=seed)
        said = (f"P({best['label']} beats {runner['label']}) = {fmt(duel.p)} over "
                f"{duel.n} paired seeds (interval [{fmt(duel.low)}, {fmt(duel.high)}])")
        if duel.conclusion == "b":
            chosen = runner
            reasons.append(f"{said}, which favours {runner['label']} despite its higher mean.")
            change.append(f"More seeds moving P({runner['label']} beats {best['label']}) back "
                          "towards 0.5.")
        elif duel.conclusion == "a":
            reasons.append(f"{said}: a clear and meaningful win by the criterion of "
                           "Bouthillier et al. (2021).")
            change.append(f"Further seeds bringing the interval's lower bound to 0.5 or below; "
                          f"the two would then count as tied and the smaller model would win.")
        else:
            small = min((best, runner), key=lambda f: f["cost"].get("params") or math.inf)
            chosen = small
            why = ("tied by the criterion of Bouthillier et al. (2021)"
                   if duel.conclusion == "tied" else
                   f"undecided ({duel.note or 'too few paired seeds'}; about "
                   f"{duel.seeds_needed} paired seeds would settle it at this spread)"
                   if duel.seeds_needed else f"undecided ({duel.note})")
            reasons.append(f"{said}: {why}, so we take the smaller "
                           f"model, {small['label']} ({fmt(small['cost'].get('params'))} "
                           "parameters).")
            change.append(f"Seeds showing one of {best['label']}/{runner['label']} clearly "
                          "better (lower bound > 0.5 and P > 0.75) would pick that one even "
                          "if larger.")
    err = chosen["metrics"]["error"]
    reasons.insert(0, f"{chosen['label']} ({chosen['origin']}) has mean test error "
                      f"{fmt(err['mean'])} over {err['n']} seed(s).")
    name, ratio = _worst_stress(chosen)
    if name:
        reasons.append(f"Its hardest stress set is {name}: error ×{fmt(ratio, 3)} the "
                       "in-distribution error.")
        change.append(f"A stress ratio on {name} far above the runner-up's, once measured on "
                      "data closer to the intended use.")
    if chosen["equivariant"]:
        reasons.append(f"It passed the equivariance gate (error "
                       f"{fmt(chosen['equivariance_error'])}).")
    if control is not None and control is not chosen:
        vs = p_outperform(*paired_errors(chosen, control), seed=seed)
        if vs.conclusion == "a":
            reasons.append(f"It beats the non-equivariant control {control['label']} "
                           f"(P = {fmt(vs.p)}).")
        else:
            c_name, c_ratio = _worst_stress(control)
            how = (f"{vs.conclusion}; about {vs.seeds_needed} paired seeds would settle it"
                   if vs.conclusion == "undecided" and vs.seeds_needed else vs.conclusion)
            reasons.append(f"The non-equivariant control {control['label']} is not clearly "
                           f"worse in distribution (P = {fmt(vs.p)} over {vs.n} paired seeds, "
                           f"{how}); the case for symmetry "
                           f"rests on the stress sets (control's worst: {c_name} "
                           f"×{fmt(c_ratio, 3)}).")
        change.append(f"The control {control['label']} matching the choice on the stress sets "
                      "as well: the simpler model would then do.")
    change.append("Validation against experiments or trusted simulations showing larger "
                  "errors than measured here.")
    decision = (f"Use {chosen['label']} ({chosen['config']['model']['family']}, "
                f"{chosen['origin']}) as the configuration to carry forward.")
    return {"label": chosen["label"], "decision": decision, "reasons": reasons,
            "would_change": change}, duel


def _span(fin: dict) -> str:
    errs = [s["error"] for s in fin["seeds"] if math.isfinite(s["error"])]
    return f"{fmt(min(errs))}–{fmt(max(errs))}" if errs else "nothing (no finite error)"


def _failed(fin: dict) -> int:
    return sum(s["status"] != "completed" for s in fin["seeds"])


def judge_against_baselines(pick: dict, finalists: list[dict], baselines: list[dict],
                            learned: list[dict] | None = None, *, seed: int = 0) -> None:
    """Set ``pick["beats_baselines"]`` and withdraw or qualify the recommendation.

    Fixed references (no training, no seeds) are judged by the skill score: the chosen
    finalist must have a lower mean test error than each.  A learned reference (the
    tensor-basis network) has seeds of its own, so beating it takes a paired-seed verdict
    like the head-to-head one (:func:`p_outperform`: ``a`` needed); ``b`` (the reference
    clearly better) withdraws the recommendation, ``tied`` or ``undecided`` leaves it
    provisional, with both candidates' spread over seeds in the reasons.  The verdicts are kept
    in ``pick["against_learned"]``.
    """
    chosen = next((f for f in finalists if f["label"] == pick["label"]), None)
    skill = (chosen or {}).get("skill") or {}
    if not baselines or chosen is None:
        pick["beats_baselines"] = None
        return
    records = {r["label"]: r for r in (learned or [])}
    fixed = [b for b in baselines if b.get("kind") != "learned" or b.get("label") not in records]
    losing = [b for b in fixed if not skill.get(b["name"], -1.0) > 0]
    duels = []
    for b in baselines:
        rec = records.get(b.get("label")) if b.get("kind") == "learned" else None
        if rec is None:
            continue
        vs = p_outperform(*paired_errors(chosen, rec), a=chosen["label"], b=b["name"],
                          seed=seed)
        duels.append((b, vs))
    pick["against_learned"] = [{"name": b["name"], **vs.to_dict()} for b, vs in duels]
    beaten = [b for b, vs in duels if vs.conclusion == "b"]
    open_ = [(b, vs) for b, vs in duels if vs.conclusion in ("tied", "undecided")]
    pick["beats_baselines"] = not losing and not beaten and not open_
    best = min(baselines, key=lambda b: b["test_error"])
    if losing:
        names = ", ".join(f"{b['name']} (test error {fmt(b['test_error'])})" for b in losing)
        pick["reasons"].append(f"It does not beat the reference predictor(s) {names}: its "
                               f"mean test error is {fmt(chosen['metrics']['error']['mean'])}.")
        pick["decision"] = (f"Do not carry {chosen['label']} forward: a reference that needs "
                            f"no training does as well or better ({names}).")
    for b, vs in duels:
        said = {"a": "beats", "b": "loses to", "tied": "ties with",
                "undecided": "is not separated from"}[vs.conclusion]
        pick["reasons"].append(
            f"Against the learned reference {b['name']}, seed by seed, it {said} it: "
            f"P = {fmt(vs.p)} over {vs.n} paired seeds, exact interval [{fmt(vs.low)}, "
            f"{fmt(vs.high)}]" + (f"; about {vs.seeds_needed} paired seeds would settle it"
                                  if vs.conclusion == "undecided" and vs.seeds_needed else "")
            + ".")
        if vs.conclusion != "a":
            rec = records[b["label"]]
            pick["reasons"].append(
                f"Over the same seeds {chosen['label']}'s test error spans "
                f"{_span(chosen)} and {b['name']}'s {_span(rec)}"
                + (f" ({_failed(rec)} of its seeds did not complete)" if _failed(rec) else "")
                + ".")
    if beaten and not losing:
        names = ", ".join(b["name"] for b in beaten)
        pick["decision"] = (f"Do not carry {chosen['label']} forward: the learned reference "
                            f"{names} is better seed by seed.")
    elif open_ and not losing:
        names = ", ".join(b["name"] for b, _ in open_)
        pick["decision"] += (f" Provisionally: the paired seeds do not show it beats "
                             f"{names}; weigh the spread over seeds, or run more seeds, "
                             "before relying on it over that reference.")
    if not losing and not beaten and not open_:
        pick["reasons"].append(
            f"It beats every reference predictor; against the strongest, {best['name']} (test "
            f"error {fmt(best['test_error'])}), its skill score is "
            f"{fmt(skill[best['name']])} (1 − error / reference error).")
