"""Dossier figures as PNG bytes (matplotlib's Agg canvas; no pyplot global state).

Every plot reads the dossier content dict only, so the same figures can be redrawn from a
saved ``dossier.json``.  Labels are ours (F1, F2, C); no user string reaches a figure.
"""
from __future__ import annotations

import io
import math

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

__all__ = ["PLOTS", "render_plots"]

# Our palette: finalists in slate/teal/ochre tones, the control in a muted grey.
COLOURS = ("#2b5c8a", "#2a9d8f", "#c98c1c", "#8e5ea2", "#b5523b", "#4f7942")
CONTROL = "#7d7d7d"


def _colour(fin: dict, i: int) -> str:
    return CONTROL if fin["role"] == "control" else COLOURS[i % len(COLOURS)]


def _png(fig: Figure) -> bytes:
    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=96, bbox_inches="tight")
    return buf.getvalue()


def _finite(x) -> bool:
    return x is not None and math.isfinite(x)


def seed_spread(content: dict) -> bytes:
    """Test error of every seed (dots) with the mean and its interval (bar) per finalist."""
    fig = Figure(figsize=(6.4, 3.4))
    ax = fig.add_subplot()
    for i, fin in enumerate(content["finalists"]):
        errs = [s["error"] for s in fin["seeds"] if _finite(s["error"])]
        ax.scatter([i] * len(errs), errs, color=_colour(fin, i), alpha=0.6, zorder=3)
        iv = fin["metrics"]["error"]
        if _finite(iv["mean"]):
            ax.errorbar([i + 0.15], [iv["mean"]], fmt="D", color=_colour(fin, i), capsize=5,
                        yerr=[[iv["mean"] - iv["low"]], [iv["high"] - iv["mean"]]])
    ax.set_xticks(range(len(content["finalists"])),
                  [f["label"] for f in content["finalists"]])
    ax.set_ylabel("test error (relative L2)")
    ax.set_title("Seeds (dots) and mean with interval (diamond)")
    ax.grid(axis="y", alpha=0.3)
    return _png(fig)


def stress_ratios(content: dict) -> bytes:
    """Mean error ratio (stress / in-distribution) per stress set, grouped by finalist."""
    names = sorted({n for f in content["finalists"] for n in f["stress"]})
    fig = Figure(figsize=(7.2, 3.6))
    ax = fig.add_subplot()
    width = 0.8 / max(len(content["finalists"]), 1)
    for i, fin in enumerate(content["finalists"]):
        ratios = [fin["stress"].get(n, {}).get("ratio", {}).get("mean", math.nan) for n in names]
        ax.bar(np.arange(len(names)) + i * width, np.nan_to_num(ratios, nan=0.0), width,
               color=_colour(fin, i), label=fin["label"])
    ax.axhline(1.0, color="black", lw=0.8, ls="--")
    ax.set_xticks(np.arange(len(names)) + 0.4 - width / 2, names, rotation=20)
    ax.set_ylabel("error ratio to test set")
    ax.set_title("Error under stress, relative to in-distribution (1 = unchanged)")
    ax.legend(fontsize=8)
    ax.grid(axis="y", alpha=0.3)
    return _png(fig)


def case_errors(content: dict) -> bytes:
    """Mean test error of every case (each reassembled from its core nodes) per finalist.

    Cases are numbered in name order, as in the dossier's table (their names are the
    user's, and stay off the figure)."""
    names = sorted({n for f in content["finalists"] for n in f.get("cases", {})})
    fig = Figure(figsize=(7.2, 3.6))
    ax = fig.add_subplot()
    width = 0.8 / max(len(content["finalists"]), 1)
    for i, fin in enumerate(content["finalists"]):
        means = [fin.get("cases", {}).get(n, {}).get("error", {}).get("mean", math.nan)
                 for n in names]
        ax.bar(np.arange(len(names)) + i * width, np.nan_to_num(means, nan=0.0), width,
               color=_colour(fin, i), label=fin["label"])
    ax.set_xticks(np.arange(len(names)) + 0.4 - width / 2,
                  [str(k + 1) for k in range(len(names))])
    ax.set_xlabel("case (number in the table)")
    ax.set_ylabel("test error (relative L2)")
    ax.set_title("Error per case (test and held-out cases)")
    ax.legend(fontsize=8)
    ax.grid(axis="y", alpha=0.3)
    return _png(fig)


def cheap_vs_full(content: dict) -> bytes:
    """Search-time validation loss against the dossier's full-fidelity test error."""
    fig = Figure(figsize=(4.8, 3.6))
    ax = fig.add_subplot()
    for i, fin in enumerate(content["finalists"]):
        x, y = fin.get("search_value"), fin["metrics"]["error"]["mean"]
        if _finite(x) and _finite(y):
            ax.scatter([x], [y], color=_colour(fin, i), s=40, zorder=3)
            ax.annotate(fin["label"], (x, y), textcoords="offset points", xytext=(5, 4))
    ax.set_xlabel("search-time validation loss")
    ax.set_ylabel("dossier test error")
    ax.set_title("Cheap score vs full training")
    ax.grid(alpha=0.3)
    return _png(fig)


def curves(content: dict) -> bytes:
    """Validation loss per epoch of every re-run (log scale)."""
    fig = Figure(figsize=(6.4, 3.4))
    ax = fig.add_subplot()
    for i, fin in enumerate(content["finalists"]):
        for j, seed in enumerate(fin["seeds"]):
            curve = [v if _finite(v) and v > 0 else np.nan for v in seed.get("curve", [])]
            if curve:
                ax.plot(range(1, len(curve) + 1), curve, color=_colour(fin, i), alpha=0.8,
                        label=fin["label"] if j == 0 else None)
    if ax.lines:
        ax.set_yscale("log")
        ax.legend(fontsize=8)
    ax.set_xlabel("epoch")
    ax.set_ylabel("validation loss")
    ax.set_title("Re-training curves, every seed")
    ax.grid(alpha=0.3)
    return _png(fig)


def front(content: dict) -> bytes:
    """Error against multiply-adds and against measured time; front points filled."""
    points = content.get("cost_front") or []
    fig = Figure(figsize=(8.4, 3.6))
    for k, (axis, name) in enumerate((("madds", "multiply-adds per node"),
                                      ("ms_per_1000_nodes", "ms per 1,000 nodes"))):
        ax = fig.add_subplot(1, 2, k + 1)
        for group, colour, mark in (("search", "#9aa9b8", "o"), ("dossier", COLOURS[0], "s")):
            pts = [p for p in points if p["group"] == group and _finite(p[axis])
                   and _finite(p["error"]) and p[axis] > 0 and p["error"] > 0]
            for on in (False, True):
                sel = [p for p in pts if p["pareto"] == on]
                ax.scatter([p[axis] for p in sel], [p["error"] for p in sel], marker=mark,
                           s=36, edgecolors=colour, facecolors=colour if on else "none",
                           label=f"{group}{' front' if on else ''}" if sel else None)
            for p in pts:
                if group == "dossier":
                    ax.annotate(p["label"], (p[axis], p["error"]), textcoords="offset points",
                                xytext=(4, 3), fontsize=8)
        if ax.collections:
            ax.set_xscale("log")
            ax.set_yscale("log")
        ax.set_xlabel(name)
        ax.set_ylabel("error (search loss / test error)")
        ax.grid(alpha=0.3)
        if k == 0:
            ax.legend(fontsize=7)
    fig.suptitle("Accuracy against cost (filled: on the front of its group)")
    return _png(fig)


# name -> (caption, drawing function); the order is the order in the dossier.
PLOTS = {
    "seed-spread": ("Test error per seed", seed_spread),
    "curves": ("Validation loss while re-training", curves),
    "stress": ("Error ratios on the stress sets", stress_ratios),
    "cases": ("Error per case", case_errors),
    "transfer": ("Search-time score against dossier score", cheap_vs_full),
    "front": ("Accuracy against cost", front),
}


def render_plots(content: dict) -> dict[str, tuple[str, bytes]]:
    """Draw every figure: name → (caption, PNG bytes)."""
    return {name: (caption, draw(content)) for name, (caption, draw) in PLOTS.items()}
