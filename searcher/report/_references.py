"""Reference predictors that need no training, scored like every finalist.

A learned closure is only worth carrying forward if it beats what costs nothing:

* ``zero``: predicts 0 in the normalised target space (0 for every non-scalar block, the
  training mean for ``0e`` blocks), the error scale every relative error is read against;
* ``training mean``: the per-component mean of the target over the training nodes;
* learned references (:func:`learned_row`): the tensor-basis network, re-trained over the
  same seeds as the finalists by the same trainer;
* every field declared ``role: baseline`` with ``of: <target>`` (kind ``field``), for
  example the RANS model's own anisotropy written by the solver: read from the files and
  normalised like the target;
* ``eddy viscosity``: for the demo's anisotropy target, the linear (Boussinesq) closure
  b = −C_μ Ŝ with C_μ = 0.09 (common practice) computed from the ``scaled_strain`` input,
  which carries Ŝ = (k/ε) S with the demo's own time scale (``searcher.data._closure``).
  It is offered whenever the dataset has a ``scaled_strain`` field of the target's kind.

Each is a parameter-free module with the models' call signature, so it is scored by the same
``searcher.train.evaluate`` on the test split and every stress set.
"""
from __future__ import annotations

import torch

__all__ = ["C_MU", "learned_row", "reference_modules", "score_references", "skill_scores"]

C_MU = 0.09


class _Reference(torch.nn.Module):
    equivariant = True

    def __init__(self, dataset, kind: str) -> None:
        super().__init__()
        self.name, self.kind = dataset.target.name, kind
        self.normaliser = dataset.normaliser
        self.mean = None
        if kind == "training mean":   # only this reference reads the training nodes
            train = [dataset.graphs[i] for i in dataset.split["train"]]
            self.mean = torch.cat([getattr(g, self.name) for g in train]).double().mean(0)

    def forward(self, data) -> torch.Tensor:
        like = getattr(data, self.name)
        if self.kind.startswith("field "):   # a reference prediction read from the files
            field = self.kind.split(" ", 1)[1]
            physical = self.normaliser.invert(field, getattr(data, field))
            return self.normaliser.apply(self.name, physical).to(like.dtype)
        if self.kind == "zero":
            return torch.zeros_like(like)
        if self.kind == "training mean":
            return self.mean.to(like.dtype).expand_as(like).clone()
        s_hat = self.normaliser.invert("scaled_strain", data.scaled_strain)
        return self.normaliser.apply(self.name, -C_MU * s_hat).to(like.dtype)


def reference_modules(dataset) -> dict:
    """``{name: (kind of reference, module)}`` for the references this dataset allows."""
    out = {"zero": ("constant", _Reference(dataset, "zero")),
           "training mean": ("constant", _Reference(dataset, "training mean"))}
    field = dataset.fields.get("scaled_strain")
    if field is not None and field.kind == dataset.target.kind:
        out["eddy viscosity"] = ("closure", _Reference(dataset, "eddy viscosity"))
    for f in dataset.fields.values():
        if f.role == "baseline" and f.of == dataset.target.name:
            out[f.name] = ("field", _Reference(dataset, f"field {f.name}"))
    return out


def score_references(dataset) -> list[dict]:
    """``[{name, kind, test_error, stress: {set: error}}]`` with the dossier's headline error
    (:func:`searcher.report._finalist_measure.headline_error`)."""
    from searcher.report._finalist_measure import headline_error
    from searcher.train import evaluate

    test = [dataset.graphs[i] for i in dataset.split["test"]]
    rows = []
    for name, (kind, module) in reference_modules(dataset).items():
        rows.append({"name": name, "kind": kind,
                     "test_error": headline_error(evaluate(module, test, dataset)),
                     "stress": {s: headline_error(evaluate(module, g, dataset))
                                for s, g in dataset.stress.items() if g}})
    return rows


def skill_scores(error: float, baselines: list[dict]) -> dict:
    """``{baseline: 1 − error / baseline error}``: 1 is perfect, 0 no better, < 0 worse."""
    return {b["name"]: (1.0 - error / b["test_error"]) if b["test_error"] > 0 else float("nan")
            for b in baselines}


def learned_row(fin: dict) -> dict:
    """A learned reference's re-runs (a record like a finalist's) as one baseline row: the
    mean over its seeds of the test error and of each stress set's error."""
    import math

    def mean(values):
        ok = [v for v in values if math.isfinite(v)]
        return float(sum(ok) / len(ok)) if ok else math.nan

    seeds = fin["seeds"]
    names = sorted({n for s in seeds for n in s["stress"]})
    return {"name": "tensor-basis network" if fin["config"]["model"]["family"] == "tensor_basis"
            else fin["label"], "kind": "learned", "label": fin["label"],
            "test_error": mean([s["error"] for s in seeds]),
            "stress": {n: mean([s["stress"].get(n, {}).get("error", math.nan) for s in seeds])
                       for n in names},
            "seeds": len(seeds), "origin": fin["origin"]}
