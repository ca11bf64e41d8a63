"""PNG charts for analysis and comparison (matplotlib, Agg backend, our own palette)."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (backend must be chosen first)
from matplotlib.collections import LineCollection  # noqa: E402
import numpy as np  # noqa: E402

__all__ = ["PALETTE", "plot_curves", "plot_bars", "plot_lines"]

# Our own palette: the good group always takes the first (deep teal) colour.
PALETTE = ("#0b6e69", "#c0582b", "#6d5a9c", "#a89a2c", "#4a7fb0", "#9c3d5d", "#6b6b6b",
           "#2f9e6e")


def _save(fig, path: Path) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return path


def plot_curves(curves, labels, order, path: Path, title: str) -> Path:
    """All validation curves on a log scale, one colour per group (``order`` = legend order)."""
    fig, ax = plt.subplots(figsize=(7.5, 4.5))
    colours = {name: PALETTE[i % len(PALETTE)] for i, name in enumerate(order)}
    alpha = 0.9 if len(curves) < 60 else max(0.08, 30 / len(curves))
    for name in order:   # one collection per group: thousands of curves draw in one call
        lines = [np.column_stack([np.arange(1, len(c) + 1), c]) for c, lab in zip(curves, labels)
                 if lab == name and len(c)]
        ax.add_collection(LineCollection(lines, colors=colours[name], alpha=alpha, lw=1))
        ax.plot([], [], color=colours[name], lw=2, label=name)
    finite = np.concatenate([np.asarray(c, dtype=float) for c in curves])
    finite = finite[np.isfinite(finite) & (finite > 0)]
    ax.set_xlim(1, max(len(c) for c in curves))
    if finite.size:
        ax.set_ylim(finite.min() / 1.5, finite.max() * 1.5)
    ax.set_yscale("log")
    ax.set_xlabel("epoch")
    ax.set_ylabel("validation loss")
    ax.set_title(title)
    ax.legend(fontsize=8, frameon=False, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return _save(fig, path)


def plot_bars(names, values, path: Path, title: str, xlabel: str, second=None) -> Path:
    """Horizontal bars; ``second`` = (values, legend label, first legend label) for pairs."""
    fig, ax = plt.subplots(figsize=(7.5, 0.35 * max(len(names), 3) + 1.4))
    y = np.arange(len(names))
    h = 0.4 if second else 0.7
    ax.barh(y, values, height=h, color=PALETTE[0], label=second[2] if second else None)
    if second:
        ax.barh(y + h, second[0], height=h, color=PALETTE[1], label=second[1])
        ax.legend(fontsize=8, frameon=False)
    ax.set_yticks(y + (h / 2 if second else 0), names, fontsize=8)
    ax.invert_yaxis()
    ax.set_xlabel(xlabel)
    ax.set_title(title)
    return _save(fig, path)


def plot_lines(series, path: Path, title: str, xlabel: str, ylabel: str,
               logx: bool = False) -> Path:
    """Lines with optional bands: ``series`` = list of (label, x, y, lo, hi)."""
    fig, ax = plt.subplots(figsize=(7.5, 4.5))
    for i, (label, x, y, lo, hi) in enumerate(series):
        colour = PALETTE[i % len(PALETTE)]
        ax.plot(x, y, color=colour, lw=2, label=label)
        if lo is not None:
            ax.fill_between(x, lo, hi, color=colour, alpha=0.18, lw=0)
    ax.set_yscale("log")
    if logx:
        ax.set_xscale("log")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.legend(fontsize=8, frameon=False)
    return _save(fig, path)
