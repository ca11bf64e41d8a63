"""Export of the chosen model and its reload with :func:`load_model`.

Three files sit side by side in the dossier folder:

* ``choice.yaml`` — a complete study file with every key fixed (no dimensions, no
  ``extends``): ``searcher check`` accepts it and ``load_study(...).fixed()`` is exactly the
  configuration that was trained;
* ``choice.pt`` — the state dict (``torch.save``; read back with ``weights_only=True``);
* ``choice-normaliser.json`` — the training data's normaliser, so predictions (made in the
  normalised irreps basis) can be turned back into physical units.

Data statistics a model is built with (the mean degree of ``aggregate: degree``) live in its
buffers, so the state dict restores them.
"""
from __future__ import annotations

import copy
import json
import pickle
from pathlib import Path

import yaml

__all__ = ["choice_study", "export_choice", "load_model", "normaliser_path"]

HEADER = """\
# Configuration chosen by the dossier of study {name!r}: every key fixed.
# Re-train with `searcher run` on this file, or reload the exported weights with
# searcher.load_model("{weights}").
# Caution: a learned closure must be validated against experiments or trusted simulations
# before it informs design; local codes and licensed engineering practice prevail.
"""


def normaliser_path(weights: Path) -> Path:
    """The side file of a weights file: ``choice.pt`` → ``choice-normaliser.json``."""
    weights = Path(weights)
    return weights.with_name(f"{weights.stem}-normaliser.json")


def choice_study(config: dict, *, name: str, summary: str) -> dict:
    """A resolved config turned into a stand-alone study mapping.

    A relative data path is made absolute (the data layer reads it from the working
    folder), so the file still works when read from the dossier folder; a storage or
    tracking URL holding a password is cleared; the pruner's epoch budget is cut to the
    exported ``training.epochs`` so that ``searcher check`` accepts the file.
    """
    out = copy.deepcopy(config)
    out["study"]["name"] = name
    out["study"]["summary"] = summary
    from searcher.search import mask_url

    # A dossier is meant to be passed around: no password leaves in it.
    for section, key in (("search", "storage"), ("tracking", "uri")):
        if mask_url(out[section][key]) != out[section][key]:
            out[section][key] = ""
    # The pruner's budget must fit in a run of the exported length (a dossier may re-train
    # with fewer epochs than the search did); the pruner plays no part in the weights.
    pruner, epochs = out["search"]["pruner"], int(out["training"]["epochs"])
    pruner["max_epochs"] = min(int(pruner["max_epochs"]), epochs)
    # The outlook pruner needs min_epochs strictly below max_epochs; a one-epoch run has no
    # room to prune at all.
    pruner["min_epochs"] = max(1, min(int(pruner["min_epochs"]), pruner["max_epochs"] - 1))
    if pruner["max_epochs"] <= 1:
        pruner["kind"] = "none"
    source = out["task"]["source"]
    if source != "demo" and not Path(source).is_absolute():
        out["task"]["source"] = str(Path(source).resolve())
    return out


def export_choice(folder: Path, config: dict, state: dict, *, name: str, summary: str,
                  normaliser: dict, yaml_name: str = "choice.yaml",
                  weights_name: str = "choice.pt") -> tuple[Path, Path]:
    """Write the chosen configuration, weights and side file into ``folder``.

    Args:
        folder: the dossier folder.
        config: the resolved config the weights were trained with.
        state: the model's state dict (CPU tensors).
        name, summary: study name and summary for the exported file.
        normaliser: ``Normaliser.to_dict()`` of the training data.

    Returns:
        ``(yaml_path, weights_path)``.

    Raises:
        UserError: ``folder`` cannot be made or written.
    """
    import torch

    from searcher.errors import ensure_folder
    from searcher.spec import load_study

    folder = ensure_folder(folder, "folder")
    yaml_path, weights = folder / yaml_name, folder / weights_name
    doc = choice_study(config, name=name, summary=summary)
    yaml_path.write_text(HEADER.format(name=config["study"]["name"], weights=weights.name)
                         + yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
    # The exported file must be a valid study that reproduces the configuration.
    if load_study(yaml_path).fixed()["model"] != config["model"]:
        raise RuntimeError(f"{yaml_path} does not reproduce the chosen model section")
    torch.save({k: v.detach().cpu() for k, v in state.items()}, weights)
    normaliser_path(weights).write_text(json.dumps(normaliser, indent=1))
    return yaml_path, weights


def load_model(path):
    """Rebuild an exported model from its weights and the YAML saved beside them.

    Args:
        path: the weights file (``choice.pt``) or the dossier folder holding it.

    Returns:
        The model in eval mode, with ``.config`` (resolved config) and ``.normaliser``
        (:class:`searcher.data.Normaliser`, or None without the side file) attached.

    Raises:
        UserError: a missing file, an invalid .yaml, weights that are corrupt or belong to
            another model, or a normaliser file that is not valid JSON of the right shape.

    Example:
        >>> model = searcher.load_model("runs/demo/dossier/choice.pt")  # doctest: +SKIP
        >>> model(graph).shape                                            # doctest: +SKIP
    """
    import torch

    from searcher.data import Normaliser, describe_fields
    from searcher.errors import UserError
    from searcher.models import build_model
    from searcher.spec import load_study

    weights = Path(path)
    if weights.is_dir():
        weights = weights / "choice.pt"
    yaml_path = weights.with_suffix(".yaml")
    for needed in (weights, yaml_path):
        if not needed.is_file():
            raise UserError.single(f"cannot load a model: {needed} does not exist (an exported "
                                   "model is a .pt file with its .yaml beside it)",
                                   file=str(needed))
    config = load_study(yaml_path).fixed()
    fields = describe_fields(config["task"])
    target = next(f.name for f in fields.values() if f.role == "target")
    model = build_model(config["model"], fields, target)
    try:
        model.load_state_dict(torch.load(weights, map_location="cpu", weights_only=True))
    except (RuntimeError, TypeError, EOFError, pickle.UnpicklingError, OSError) as err:
        # truncated or foreign file, or weights of another model than the .yaml describes
        raise _unreadable(weights, f"weights that fit the model of {yaml_path.name}",
                          err) from None
    model.eval()
    model.config = config
    side = normaliser_path(weights)
    try:
        model.normaliser = (Normaliser.from_dict(json.loads(side.read_text()))
                            if side.is_file() else None)
    except (ValueError, TypeError, AttributeError, OSError) as err:  # ValueError: bad JSON
        raise _unreadable(side, "a normaliser written by the dossier (field -> blocks)",
                          err) from None
    return model


def _unreadable(path: Path, rule: str, err: Exception):
    from searcher.errors import UserError

    first = (str(err).strip().splitlines() or [""])[0][:200]
    return UserError.single(f"cannot load a model: {path.name} must hold {rule}, but reading "
                            f"it failed ({type(err).__name__}: {first})", file=str(path))
