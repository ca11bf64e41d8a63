"""The dossier's sections as plain rows, shared by the HTML and Markdown writers.

A section is ``(anchor, title, blocks)``; a block is ``("text", str)``,
``("list", [str])``, ``("table", header, rows)``, ``("plot", name)`` or ``("code", str)``.
Writers only lay blocks out, so both formats carry the same content in the same order.
"""
from __future__ import annotations

import json
import math

import yaml

from searcher.spec import flatten

__all__ = ["SECTION_TITLES", "fmt", "sections"]

SECTION_TITLES = {
    "choice": "Our choice",
    "before-use": "Before you use this",
    "contenders": "The contenders",
    "seeds": "Seed by seed",
    "head-to-head": "Head to head",
    "references": "Against references",
    "front": "Accuracy against cost",
    "stress": "Off the training distribution",
    "cases": "Case by case",
    "symmetry-cost": "Symmetry, size and speed",
    "transfer": "Cheap scores against full training",
    "settings": "Settings that differ",
    "origin": "Where this came from",
    "files": "Files written",
}


def fmt(x, digits: int = 4) -> str:
    """A number for people: 4 significant digits, "—" for missing or non-finite."""
    if x is None or isinstance(x, str):
        return "—" if x in (None, "") else x
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, int):
        return f"{x:,}"
    return f"{x:.{digits}g}" if math.isfinite(x) else "—"


def _iv(iv: dict) -> str:
    if not iv or iv.get("n", 0) == 0:
        return "—"
    if iv["method"] == "none":
        return fmt(iv["mean"])
    return f"{fmt(iv['mean'])} [{fmt(iv['low'])}, {fmt(iv['high'])}]"


def _choice(c: dict) -> list:
    pick = c["pick"]
    return [("text", pick["decision"]), ("text", "Why:"), ("list", pick["reasons"]),
            ("text", "What evidence would change this:"), ("list", pick["would_change"])]


def _contenders(c: dict) -> list:
    rows = [[f["label"], f["role"], f["origin"], f["config"]["model"]["family"],
             fmt(f.get("search_value")), _iv(f["metrics"]["error"]),
             _iv(f["metrics"]["best_value"]), fmt(f["cost"].get("params"))]
            for f in c["finalists"]]
    ctl = c.get("control") or {}
    return [("text", f"{c['settings']['seeds']} seed(s) each, {c['settings']['epochs']} "
                     "epochs on the full training set. Intervals: "
                     f"{c['settings']['confidence']:.0%} bootstrap over seeds."),
            ("text", c.get("error_definition", "")),
            ("text", f"The control {ctl['label']}: {ctl['origin']}." if ctl else ""),
            ("table", ["label", "role", "from", "family", "search loss",
                       "test error", "val loss", "params"], rows)]


def _seeds(c: dict) -> list:
    rows = []
    for f in c["finalists"]:
        for s in f["seeds"]:
            rows.append([f["label"], str(s["seed"]), s["status"], fmt(s["epochs"]),
                         fmt(s["best_value"]), fmt(s["error"])]
                        + [fmt(v) for v in s["test"].values()])
    blocks = sorted({k for f in c["finalists"] for s in f["seeds"] for k in s["test"]})
    notes = sorted({f["metrics"]["error"]["note"] for f in c["finalists"]} - {""})
    return [("table", ["label", "seed", "status", "epochs", "val loss", "test error"]
             + [f"test {b}" for b in blocks], rows),
            ("list", notes), ("plot", "seed-spread"), ("plot", "curves")]


def _head_to_head(c: dict) -> list:
    out = []
    duel = c.get("p_a_beats_b")
    if duel:
        verdict = {"a": f"{duel['a']} is better", "b": f"{duel['b']} is better",
                   "tied": "tied", "undecided": "undecided"}[duel["conclusion"]]
        out += [("table", ["comparison", "P(A beats B)", "exact interval", "sign-flip p",
                           "paired seeds", "seeds to settle", "verdict"],
                 [[f"A = {duel['a']}, B = {duel['b']}", fmt(duel["p"]),
                   f"[{fmt(duel['low'])}, {fmt(duel['high'])}]", fmt(duel.get("p_value")),
                   str(duel["n"]), fmt(duel.get("seeds_needed")), verdict]]),
                ("list", [duel["rule"]] + ([duel["note"]] if duel["note"] else []))]
    else:
        out.append(("text", "Only one finalist: nothing to compare."))
    rs = c["rank_stability"]
    out.append(("text", f"Rank stability over {rs['seeds']} seed(s) and {rs['candidates']} "
                        f"candidates: Kendall's W = {fmt(rs['kendall_w'])}, seeds reproducing "
                        f"the order of the means = {fmt(rs['same_order'])}. {rs['note']}".strip()))
    return out


def _stress(c: dict) -> list:
    names = sorted({n for f in c["finalists"] for n in f["stress"]})
    rows = [[f["label"]] + [f"{_iv(f['stress'][n]['error'])} (×{fmt(f['stress'][n]['ratio']['mean'], 3)})"
                            if n in f["stress"] else "—" for n in names]
            for f in c["finalists"]]
    return [("text", "Test error on each stress set; in brackets the ratio to the same seed's "
                     "in-distribution test error (1 = no loss of accuracy)."),
            ("table", ["label"] + names, rows), ("plot", "stress")]


def _cases(c: dict) -> list:
    fins = c["finalists"]
    first = {}
    for f in fins:
        for case, r in f.get("cases", {}).items():
            first.setdefault(case, r)
    rows = [[str(k + 1), case, r["part"], fmt(r["nodes"]), fmt(r["files"])]
            + [_iv(f["cases"][case]["error"]) if case in f.get("cases", {}) else "—"
               for f in fins] for k, (case, r) in enumerate(sorted(first.items()))]
    return [("text", c.get("case_definition", "")),
            ("table", ["#", "case", "part", "nodes", "files"]
             + [f"error {f['label']}" for f in fins], rows), ("plot", "cases")]


def _symmetry_cost(c: dict) -> list:
    rows = [[f["label"], fmt(f["equivariant"]), fmt(f["equivariance_error"]),
             fmt(f["cost"].get("params")), fmt(f["cost"].get("madds_per_node")),
             _iv(f["metrics"]["inference_ms_per_1k_nodes"]), _iv(f["metrics"]["cpu_seconds"])]
            for f in c["finalists"]]
    return [("table", ["label", "equivariant", "equivariance error", "params",
                       "multiply-adds per node", "ms per 1,000 nodes", "training CPU-s"], rows),
            ("text", "The equivariance error is the equivariance gate's float64 measure "
                     "(largest over seeds); baselines are not expected to pass it.")]


def _transfer(c: dict) -> list:
    t = c["fidelity_transfer"]
    if t.get("too_thin", True):
        text = (f"Too thin to judge: {t['n']} configurations have both a search-time loss and "
                f"a dossier test error; a rank correlation needs at least 5.")
    else:
        text = (f"Spearman rho between search-time loss and dossier test error over {t['n']} "
                f"configurations: {fmt(t['rho'])} (exact permutation p = "
                f"{fmt(t['p_value'])}; Kendall tau {fmt(t.get('tau'))}).")
    return [("text", text), ("list", [t["note"]] if t["note"] else []), ("plot", "transfer")]


def _settings(c: dict) -> list:
    flat = [flatten(f["config"]) for f in c["finalists"]]
    keys = [k for k in flat[0] if len({json.dumps(fl.get(k), sort_keys=True) for fl in flat}) > 1]
    rows = [[k] + [json.dumps(fl.get(k)) for fl in flat] for k in keys]
    picked = next(f for f in c["finalists"] if f["label"] == c["pick"]["label"])
    return [("table", ["key"] + [f["label"] for f in c["finalists"]], rows),
            ("text", f"Model settings of the choice ({picked['label']}):"),
            ("code", yaml.safe_dump(picked["config"]["model"], sort_keys=False))]


def _origin(c: dict) -> list:
    p = c["provenance"]
    rows = [[k, str(v)] for k, v in p.items() if k != "packages"]
    rows += [[f"package {k}", v] for k, v in p["packages"].items()]
    return [("table", ["item", "value"], rows)]


def _references(c: dict) -> list:
    base = c.get("baselines") or []
    if not base:
        return [("text", "No reference predictor applies to this data.")]
    learned = [(f"{r['label']}: {r['origin']}; test error "
                f"{_iv(r['metrics']['error'])} over {r['metrics']['error']['n']} seed(s).")
               for r in c.get("references") or []]
    fins = c["finalists"]
    rows = [[b["name"], b["kind"], fmt(b["test_error"])]
            + [fmt((f.get("skill") or {}).get(b["name"])) for f in fins] for b in base]
    beats = c["pick"].get("beats_baselines")
    duels = c["pick"].get("against_learned") or []
    open_ = [d["name"] for d in duels if d["conclusion"] in ("tied", "undecided")]
    lost = [d for d in duels if d["conclusion"] == "b"]
    chosen = next((f for f in fins if f["label"] == c["pick"]["label"]), {})
    skill = chosen.get("skill") or {}
    fixed_ok = all(skill.get(b["name"], -1) > 0 for b in base if b["kind"] != "learned")
    learned += [f"Seed by seed against {d['name']}: P = {fmt(d['p'])} over {d['n']} paired "
                f"seeds, exact interval [{fmt(d['low'])}, {fmt(d['high'])}]: {d['conclusion']}."
                for d in duels]
    if beats:
        verdict = ("The choice beats every reference predictor (learned ones by a paired-seed "
                   "verdict).")
    elif beats is False and open_ and not lost and fixed_ok:
        verdict = (f"The choice is not shown to beat every reference predictor: against "
                   f"{', '.join(open_)} the paired seeds show no clear winner; the "
                   "recommendation is provisional.")
    elif beats is False:
        verdict = "The choice does NOT beat every reference predictor; it is not recommended."
    else:
        verdict = ""
    return [("text", "Test error (the dossier's error: mean relative L2 over the target's "
                     "irrep blocks) of reference predictors: those that need no training "
                     "(kind constant, closure, field) and learned ones re-trained over the "
                     "same seeds (kind learned, mean over seeds); and each finalist's "
                     "skill score 1 − error / reference error (> 0: better than the "
                     "reference)."),
            ("table", ["reference", "kind", "test error"] + [f"skill {f['label']}"
                                                             for f in fins], rows),
            ("list", learned), ("text", verdict)]


def _front(c: dict) -> list:
    points = c.get("cost_front") or []
    rows = [[str(p.get("label", f"trial {p.get('trial')}")), p["group"], fmt(p["error"]),
             fmt(p["ms_per_1000_nodes"]), fmt(p["madds"]), fmt(p["pareto"])]
            for p in points if p["pareto"] or p["group"] == "dossier"]
    return [("text", "Error against inference cost. Dossier points: mean test error of each "
                     "re-trained candidate; search points: each completed trial's search "
                     "loss, its architecture timed here on the test graphs. A point is on "
                     "the front when no point of its group is at least as good in error, "
                     "time and multiply-adds and better in one. The table lists every "
                     "dossier point and the search points on the front."),
            ("table", ["point", "group", "error", "ms per 1,000 nodes",
                       "multiply-adds per node", "on the front"], rows),
            ("plot", "front")]


def _files(c: dict) -> list:
    return [("table", ["what", "file"], [[k, str(v)] for k, v in c["files"].items()
                                         if not isinstance(v, list)]
             + [["figure", name] for name in c["files"].get("plots", [])])]


BUILDERS = {"choice": _choice, "before-use": lambda c: [("list", c["cautions"])],
            "contenders": _contenders, "seeds": _seeds, "head-to-head": _head_to_head,
            "references": _references, "front": _front,
            "stress": _stress, "cases": _cases, "symmetry-cost": _symmetry_cost, "transfer": _transfer,
            "settings": _settings, "origin": _origin, "files": _files}


def sections(content: dict) -> list[tuple[str, str, list]]:
    """Every section of the dossier, in order: ``(anchor, title, blocks)``."""
    return [(anchor, title, BUILDERS[anchor](content)) for anchor, title in SECTION_TITLES.items()]
