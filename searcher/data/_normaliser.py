"""Per-field, per-irrep-block normalisation that commutes with rotations and reflections.

For each field and each irrep block (one copy of one irrep) of its irreps: a scale equal to
the RMS norm of the block over the training values, and — for ``0e`` blocks only — a mean
subtracted first.  Dividing a block by a positive scalar commutes with its ``D`` matrix, and
shifting only the invariant ``0e`` part does too, so normalised data stay equivariant.  (A
``0o`` block changes sign under parity, so it gets no mean.)
"""
from __future__ import annotations

import numpy as np

__all__ = ["Normaliser"]


def _blocks(irreps: str) -> list[tuple[str, int, int]]:
    from e3nn import o3

    out, start = [], 0
    for mul, ir in o3.Irreps(irreps):
        for _ in range(mul):
            out.append((str(ir), start, start + ir.dim))
            start += ir.dim
    return out


class Normaliser:
    """Scales and 0e means per field block; see the module docstring.

    ``blocks``: field name → list of ``{"irrep", "start", "stop", "mean", "scale"}``.
    """

    def __init__(self, blocks: dict[str, list[dict]]):
        self.blocks = blocks

    @classmethod
    def fit(cls, irreps: dict[str, str], values: dict[str, list[np.ndarray]]) -> "Normaliser":
        """Fit on training arrays.

        Args:
            irreps: field name → irreps string.
            values: field name → list of ``[n, dim]`` arrays (one per training graph).
        """
        blocks = {}
        for name, ir in irreps.items():
            data = np.concatenate([np.asarray(v, dtype=np.float64) for v in values[name]])
            rows = []
            for label, a, b in _blocks(ir):
                part = data[:, a:b]
                mean = float(part.mean()) if label == "0e" else 0.0
                rms = float(np.sqrt(np.mean(((part - mean) ** 2).sum(1))))
                # A block that is zero on every training point keeps scale 1 (nothing to scale).
                rows.append({"irrep": label, "start": a, "stop": b, "mean": mean,
                             "scale": rms if rms > 1e-12 else 1.0})
            blocks[name] = rows
        return cls(blocks)

    def _vectors(self, name: str, like):
        dim = self.blocks[name][-1]["stop"]
        mean, scale = np.zeros(dim), np.ones(dim)
        for row in self.blocks[name]:
            mean[row["start"]:row["stop"]] = row["mean"]
            scale[row["start"]:row["stop"]] = row["scale"]
        if hasattr(like, "detach"):
            import torch

            return tuple(torch.as_tensor(v, dtype=like.dtype) for v in (mean, scale))
        return mean, scale

    def apply(self, name: str, values):
        """Normalise ``[..., dim]`` values of field ``name`` (numpy or torch)."""
        mean, scale = self._vectors(name, values)
        return (values - mean) / scale

    def invert(self, name: str, values):
        """Undo :meth:`apply`: normalised ``[..., dim]`` → physical irreps-basis values."""
        mean, scale = self._vectors(name, values)
        return values * scale + mean

    def to_dict(self) -> dict:
        return {name: [dict(row) for row in rows] for name, rows in self.blocks.items()}

    @classmethod
    def from_dict(cls, d: dict) -> "Normaliser":
        return cls({name: [dict(row) for row in rows] for name, rows in d.items()})

    def __eq__(self, other) -> bool:
        return isinstance(other, Normaliser) and self.to_dict() == other.to_dict()
