"""Best-epoch weights kept for the current top ``search.keep_best`` trials only.

Files are ``<output>/checkpoints/trial-<number>.pt`` (a state dict, see
``searcher.train.save_weights``); a file whose trial drops out of the top k is deleted.
"""
from __future__ import annotations

import re
from pathlib import Path

from searcher.train import save_weights

from searcher.outcomes import ranked_values

__all__ = ["keep_best", "checkpoint_path"]

_NAME = re.compile(r"trial-(\d+)\.pt$")


def checkpoint_path(output_dir: Path, number: int) -> Path:
    """Where trial ``number``'s best weights are kept (the file may not exist)."""
    return Path(output_dir) / "checkpoints" / f"trial-{number:05d}.pt"


def keep_best(trials, output_dir: Path, number: int, value: float, state: dict | None,
              k: int) -> bool:
    """Save ``state`` for trial ``number`` if it is in the top ``k``; delete the rest.

    Args:
        trials: the study's trials (the current one may still be RUNNING).
        output_dir: the study's output folder.
        number, value: the finishing trial and its best validation loss.
        state: its best state dict.
        k: how many to keep (0 keeps none).

    Returns:
        Whether the trial's weights were kept.
    """
    ranked = [(v, n) for v, n in ranked_values(trials) if n != number] + [(value, number)]
    top = {n for _, n in sorted(ranked)[:max(0, int(k))]}
    kept = number in top and state is not None
    if kept:
        save_weights(state, checkpoint_path(output_dir, number))
    folder = Path(output_dir) / "checkpoints"
    for path in folder.glob("trial-*.pt") if folder.exists() else ():
        match = _NAME.search(path.name)
        if match and int(match.group(1)) not in top:
            path.unlink(missing_ok=True)
    return kept
