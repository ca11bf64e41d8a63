"""Traits of the good group: which parameter values and ranges its trials share.

Categorical values: one-sided Fisher exact test (is the value over-represented in the group?)
with Benjamini-Hochberg q-values over every test made.  Numeric parameters: Mann-Whitney U
with the common-language effect size U/(n*m).  Rules: a depth-3 decision tree read back as at
most three "if ... then" lines with support and precision.  Conditional parameters (absent
in some trials) are tested only over the trials where they are active.
"""
from __future__ import annotations

import math

import numpy as np
from optuna.distributions import CategoricalDistribution
from scipy.stats import false_discovery_control, fisher_exact, mannwhitneyu
from sklearn.tree import DecisionTreeClassifier

from searcher.analysis._records import TrialRecord

__all__ = ["param_kinds", "enrichment", "trait_rules"]

_FEW_LEVELS = 8


def param_kinds(records: list[TrialRecord]) -> dict[str, str]:
    """Parameter name -> "choice" or "number" over every record (first distribution seen)."""
    kinds: dict[str, str] = {}
    for rec in records:
        for name, value in rec.params.items():
            if name in kinds:
                continue
            dist = rec.distributions.get(name)
            numeric = isinstance(value, (int, float)) and not isinstance(value, bool)
            kinds[name] = "choice" if isinstance(dist, CategoricalDistribution) or not numeric \
                else "number"
    return dict(sorted(kinds.items()))


def _present(records, name):
    rows = [i for i, r in enumerate(records) if name in r.params]
    return np.array(rows, dtype=int), [records[i].params[name] for i in rows]


def enrichment(records: list[TrialRecord], in_group: np.ndarray) -> list[dict]:
    """Every categorical value and numeric parameter tested against the good group.

    Args:
        records: finished trials.
        in_group: ``[len(records)]`` bool, True for the good group.

    Returns:
        One dict per test, sorted by q: ``parameter``, ``value`` (the choice, or the range
        "lo..hi" in the group for numbers), ``kind``, ``in_group`` and ``overall`` (fractions
        for choices, medians for numbers), ``p``, ``q``, and ``effect`` (odds ratio, or
        U/(n*m) where 1 means every group trial is above every other).
    """
    rows: list[dict] = []
    for name, kind in param_kinds(records).items():
        idx, values = _present(records, name)
        grp = in_group[idx]
        if grp.sum() == 0 or (~grp).sum() == 0:
            continue
        levels = {str(v) for v in values}
        if kind == "choice" or (len(levels) <= _FEW_LEVELS and all(
                float(v).is_integer() for v in values)):
            # An integer with few levels (lmax, layers) is also tested level by level.
            keys = np.array([str(v) for v in values])
            for value in sorted(set(keys)):
                has = keys == value
                table = [[int((has & grp).sum()), int((~has & grp).sum())],
                         [int((has & ~grp).sum()), int((~has & ~grp).sum())]]
                res = fisher_exact(table, alternative="greater")
                rows.append({"parameter": name, "value": value, "kind": "choice",
                             "in_group": table[0][0] / grp.sum(), "overall": has.mean(),
                             "p": float(res.pvalue), "effect": float(res.statistic),
                             "active_in": int(idx.size)})
        if kind == "number":
            x = np.asarray(values, dtype=float)
            inside, outside = x[grp], x[~grp]
            res = mannwhitneyu(inside, outside, alternative="two-sided")
            rows.append({"parameter": name, "value": f"{inside.min():g}..{inside.max():g}",
                         "kind": kind, "in_group": float(np.median(inside)),
                         "overall": float(np.median(x)), "p": float(res.pvalue),
                         "effect": float(res.statistic) / (inside.size * outside.size),
                         "active_in": int(idx.size)})
    if rows:
        q = false_discovery_control([r["p"] for r in rows], method="bh")
        for row, qv in zip(rows, q):
            row["q"] = float(qv)
    return sorted(rows, key=lambda r: (r["q"], r["p"], r["parameter"], r["value"]))


def _design(records, kinds):
    columns, names = [], []
    for name, kind in kinds.items():
        present = [name in r.params for r in records]
        if kind == "choice":
            for value in sorted({str(r.params[name]) for r in records if name in r.params}):
                columns.append([1.0 if p and str(r.params[name]) == value else 0.0
                                for p, r in zip(present, records)])
                names.append((name, value))
        else:
            columns.append([float(r.params[name]) if p else math.nan
                            for p, r in zip(present, records)])
            names.append((name, None))
    return np.array(columns, dtype=float).T.reshape(len(records), len(names)), names


def _render(choices: list[str], bounds: dict, ints: dict) -> str:
    """Readable conjunction; numeric bounds on one parameter are merged (``2 ≤ a ≤ 3``)."""
    parts = list(choices)
    for name, (lo, hi) in bounds.items():
        if ints.get(name):
            lo = None if lo is None else math.floor(lo) + 1   # x > 1.5 on integers: x ≥ 2
            hi = None if hi is None else math.floor(hi)
            if lo is not None and lo == hi:
                parts.append(f"{name} = {lo}")
                continue
        fmt = (lambda v: f"{v}") if ints.get(name) else (lambda v: f"{v:.3g}")
        op_lo = "≥" if ints.get(name) else ">"
        if lo is not None and hi is not None:
            parts.append(f"{fmt(lo)} {'≤' if ints.get(name) else '<'} {name} ≤ {fmt(hi)}")
        elif lo is not None:
            parts.append(f"{name} {op_lo} {fmt(lo)}")
        else:
            parts.append(f"{name} ≤ {fmt(hi)}")
    return " and ".join(parts) or "any configuration"


def trait_rules(records: list[TrialRecord], in_group: np.ndarray, label: str,
                max_rules: int = 3) -> list[dict]:
    """At most ``max_rules`` readable rules that pick out the good group.

    Each rule is a leaf of a depth-3 tree whose share of group trials beats the overall share:
    ``{"rule": "a ≥ 2 and b = x → 7 of 9 in 'converges deep'", "support": 9, "hits": 7,
    "precision": 0.78}``.
    """
    kinds = param_kinds(records)
    if not kinds or in_group.sum() == 0 or in_group.all():
        return []
    x, names = _design(records, kinds)
    ints = {r_name: all(float(r.params[r_name]).is_integer() for r in records
                        if r_name in r.params) for r_name, k in kinds.items() if k == "number"}
    tree = DecisionTreeClassifier(max_depth=3, min_samples_leaf=2, class_weight="balanced",
                                  random_state=0).fit(x, in_group)
    t = tree.tree_
    leaves = tree.apply(x)
    base = in_group.mean()
    rules = []

    def walk(node, choices, bounds):
        if t.children_left[node] == -1:
            members = leaves == node
            hits, support = int(in_group[members].sum()), int(members.sum())
            if support and hits / support > base and hits:
                text = _render(choices, bounds, ints)
                rules.append({"rule": f"{text} → {hits} of {support} in '{label}'",
                              "support": support, "hits": hits, "precision": hits / support})
            return
        (name, value), thr = names[t.feature[node]], t.threshold[node]
        if value is not None:   # one-hot column: left = other values, right = this value
            walk(t.children_left[node], choices + [f"{name} ≠ {value}"], bounds)
            walk(t.children_right[node], choices + [f"{name} = {value}"], bounds)
            return
        if not math.isfinite(thr):   # sklearn's split on missing: inactive trials go right
            walk(t.children_left[node], choices + [f"{name} active"], bounds)
            walk(t.children_right[node], choices + [f"{name} inactive"], bounds)
            return
        lo, hi = bounds.get(name, (None, None))
        walk(t.children_left[node], choices,
             {**bounds, name: (lo, thr if hi is None else min(hi, thr))})
        walk(t.children_right[node], choices,
             {**bounds, name: (thr if lo is None else max(lo, thr), hi)})

    walk(0, [], {})
    return sorted(rules, key=lambda r: (-r["precision"] * r["hits"], -r["hits"]))[:max_rules]
