"""Train/val/test splits by sample, and the symmetry stress sets built from test samples.

Stress sets (``task.split.stress``; the accepted names are :data:`searcher.spec.STRESS_SETS`):

* ``rotated`` — each test sample re-oriented by a uniform random rotation ``R``: positions
  ``x ↦ R x`` and every field by its irreps ``D(R)``;
* ``reflected`` — parity ``x ↦ −x``, fields by ``D(−I)`` (vectors flip, 0e/2e stay);
* ``translated`` — positions shifted by ``task.split.shift`` in a random direction, applied
  *before* centring so the pipeline (not only the model) is tested;
* ``unseen_family`` — the samples of ``task.split.hold_out`` families;
* ``denser`` / ``sparser`` — the same analytic flow sample regenerated with 2× / 0.5× probes
  (demo only; file data cannot be re-probed, which ``stats["stress_notes"]`` says).
"""
from __future__ import annotations

import numpy as np
from scipy.spatial.transform import Rotation

from searcher.data._demo import Sample, demo_sample
from searcher.data._kinds import Field, rotate_irreps

__all__ = ["split_samples", "transform_sample", "stress_sets"]


def split_samples(indices: list[int], fractions, seed: int) -> dict[str, list[int]]:
    """Seeded split of sample indices into train/val/test by ``fractions`` (sum to 1)."""
    order = np.random.default_rng([int(seed), 17]).permutation(np.asarray(indices, dtype=int))
    total = float(sum(fractions))
    n = len(order)
    n_train = int(round(n * fractions[0] / total))
    n_val = int(round(n * fractions[1] / total))
    if n >= 3:   # every part gets at least one sample when there are enough
        n_train = min(max(n_train, 1), n - 2)
        n_val = min(max(n_val, 1), n - n_train - 1)
    parts = {"train": order[:n_train], "val": order[n_train:n_train + n_val],
             "test": order[n_train + n_val:]}
    return {k: sorted(int(i) for i in v) for k, v in parts.items()}


def transform_sample(sample: Sample, fields: dict[str, Field], rotation=None,
                     shift=None) -> Sample:
    """Apply ``x ↦ R x + shift`` to positions and ``D(R)`` to every field (R may be improper)."""
    pos, values = sample.pos, dict(sample.fields)
    if rotation is not None:
        pos = pos @ np.asarray(rotation).T
        values = {k: rotate_irreps(fields[k].irreps, v, rotation) for k, v in values.items()}
    if shift is not None:
        pos = pos + np.asarray(shift)
    return Sample(pos, values, sample.family, sample.sample, sample.source, sample.edge_index,
                  dict(sample.info))


def stress_sets(task_cfg: dict, fields: dict[str, Field], test: list[Sample],
                held_out: list[Sample]) -> tuple[dict[str, list[Sample]], list[str]]:
    """Build the requested stress sets.

    Returns:
        name → samples, and notes on sets that could not be built.
    """
    split = task_cfg["split"]
    rng = np.random.default_rng([int(split["seed"]), 29])
    is_demo = task_cfg["source"] == "demo"
    sets, notes = {}, []
    for name in split["stress"]:
        if name == "rotated":
            sets[name] = [transform_sample(s, fields, Rotation.random(random_state=rng).as_matrix())
                          for s in test]
        elif name == "reflected":
            sets[name] = [transform_sample(s, fields, -np.eye(3)) for s in test]
        elif name == "translated":
            direction = rng.normal(size=(len(test), 3))
            direction /= np.linalg.norm(direction, axis=1, keepdims=True)
            sets[name] = [transform_sample(s, fields, shift=float(split["shift"]) * d)
                          for s, d in zip(test, direction)]
        elif name == "unseen_family":
            if held_out:
                sets[name] = held_out
            else:
                notes.append("unseen_family skipped: task.split.hold_out names no family")
        elif name in ("denser", "sparser"):
            if not is_demo:
                notes.append(f"{name} skipped: file data cannot be re-probed")
                continue
            factor = 2.0 if name == "denser" else 0.5
            sets[name] = [demo_sample(task_cfg["demo"], s.sample,
                                      probes=max(2, int(round(len(s.pos) * factor))))
                          for s in test]
    return sets, notes
