"""One training run: ``fit(model, dataset, config)``.

The loss is the mean squared error on the normalised target.  After every epoch the run
evaluates the validation split, calls the callback and checks, in this order:

* divergence: a non-finite training step, or an epoch whose training or validation loss is
  above ``training.diverge_factor`` times the lowest loss seen so far.  The lowest starts at
  the validation loss of predicting zero (the normalised target's mean square, no forward
  pass needed), so a run that explodes in its first epoch, or starts out huge and stays
  there, is caught;
* the callback's request to stop (status ``stopped``);
* ``training.time_limit`` seconds of wall time (status ``timeout``), checked at epoch ends.

On return the model holds the weights of its best validation epoch.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import torch

from ._batches import TrainBatches, collate
from ._checkpoint import save_weights
from ._fidelity import fidelity_graphs
from ._geometry_store import with_geometry
from ._metrics import core_rows, predict_errors
from ._schedule import Schedule, make_optimiser

__all__ = ["fit", "FitResult", "pick_device"]

_VAL_BATCH = 4  # validation batches hold this many training batches' worth of graphs


@dataclass
class FitResult:
    """What one training run did.

    Attributes:
        status: ``completed`` | ``diverged`` | ``timeout`` | ``stopped``.
        reason: one line saying why the run ended.
        epochs: epochs run (a diverged epoch counts).
        best_value: lowest validation loss (``inf`` when none was finite).
        best_epoch: its epoch (0 when none).
        curve: validation loss per epoch.
        history: metrics per epoch (the dicts given to the callback).
        best_state: state dict of the best epoch (CPU tensors), ``None`` when none.
        cpu_seconds: CPU time of this process during the run.
        seconds: wall time of the run.
    """

    status: str
    reason: str
    epochs: int
    best_value: float
    best_epoch: int
    curve: list = field(default_factory=list)
    history: list = field(default_factory=list)
    best_state: dict | None = field(default=None, repr=False)
    cpu_seconds: float = 0.0
    seconds: float = 0.0


def pick_device(training: dict) -> torch.device:
    """``cpu`` unless ``training.device`` is ``auto`` and CUDA is available."""
    if training.get("device") == "auto" and torch.cuda.is_available():
        return torch.device("cuda")
    return torch.device("cpu")


def _zero_loss(batches, target: str) -> float:
    """Validation loss of predicting zero everywhere (the normalised target's mean square)."""
    sq = sum(float((core_rows(b, getattr(b, target)) ** 2).sum()) for b in batches)
    n = sum(core_rows(b, getattr(b, target)).numel() for b in batches)
    return sq / n if n else math.inf


def _finite(x: float) -> bool:
    return math.isfinite(x)


def fit(model: torch.nn.Module, dataset, config: dict, *,
        callback: Callable[[int, dict], bool] | None = None,
        checkpoint_dir: str | Path | None = None, full_fidelity: bool = False) -> FitResult:
    """Train ``model`` on ``dataset`` as the resolved ``config`` says.

    Args:
        model: a built model (``searcher.models.build_model``).
        dataset: a built dataset (``searcher.data.build_dataset``).
        config: the resolved config; ``training`` and ``task.fidelity`` are read.
        callback: ``callback(epoch, metrics) -> bool`` after every epoch (epochs from 1);
            True stops the run. metrics: ``train_loss``, ``val_loss``,
            ``val_rel_l2/<block>``, ``lr``, ``seconds``.
        checkpoint_dir: when given, the best weights are written to ``<dir>/best.pt``.
        full_fidelity: ignore ``task.fidelity`` (train on every graph and probe).

    Returns:
        A :class:`FitResult`.

    Example:
        >>> result = fit(model, dataset, study.fixed())
        >>> result.status, result.best_epoch, len(result.curve)
        ('completed', 18, 20)
    """
    training = config["training"]
    start_wall, start_cpu = time.perf_counter(), time.process_time()
    device = pick_device(training)
    model.to(device)
    gen = torch.Generator().manual_seed(int(training["seed"]))
    train_graphs, val_graphs = fidelity_graphs(dataset, config, full=full_fidelity)
    both = with_geometry(model, dataset, config, train_graphs + val_graphs, full=full_fidelity)
    train_graphs, val_graphs = both[:len(train_graphs)], both[len(train_graphs):]
    batches = TrainBatches(model, train_graphs, int(training["batch_size"]), gen, device)
    val_batches = collate(model, val_graphs, _VAL_BATCH * int(training["batch_size"]),
                          device=device)
    optimiser = make_optimiser(model, training)
    schedule = Schedule(optimiser, training)
    clip = float(training["clip"])
    # walked once: `model.parameters()` visits every submodule (gates, generated code) and
    # cost ~0.3 ms a step on the demo's models
    trained = [p for p in model.parameters() if p.requires_grad]
    factor = float(training["diverge_factor"])
    limit = float(training["time_limit"])
    target = dataset.target.name

    lowest = _zero_loss(val_batches, target)
    result = FitResult("completed", "", 0, math.inf, 0)
    for epoch in range(1, int(training["epochs"]) + 1):
        t0 = time.perf_counter()
        lr = schedule.start(epoch)
        model.train()
        sq, items, bad_step = 0.0, 0, 0
        for step, batch in enumerate(batches.epoch(), 1):
            optimiser.zero_grad(set_to_none=True)
            true = core_rows(batch, getattr(batch, target))
            loss = torch.mean((core_rows(batch, model(batch)) - true) ** 2)
            if not torch.isfinite(loss):
                bad_step = step
                break
            loss.backward()
            if clip > 0:
                torch.nn.utils.clip_grad_norm_(trained, clip, foreach=True)
            optimiser.step()
            sq += float(loss.detach()) * true.numel()
            items += true.numel()
        train_loss = math.nan if bad_step else sq / max(items, 1)
        acc = predict_errors(model, val_batches, dataset)
        val_loss = acc.loss
        metrics = {"train_loss": train_loss, "val_loss": val_loss}
        metrics.update({f"val_rel_l2/{k}": v for k, (_, v) in acc.measures().items()})
        metrics.update({"lr": lr, "seconds": time.perf_counter() - t0})
        result.epochs = epoch
        result.curve.append(val_loss)
        result.history.append(metrics)
        if _finite(val_loss) and val_loss < result.best_value:
            result.best_value, result.best_epoch = val_loss, epoch
            result.best_state = {k: v.detach().to("cpu", copy=True)
                                 for k, v in model.state_dict().items()}
        schedule.end(epoch, val_loss if _finite(val_loss) else math.inf)
        stop = bool(callback(epoch, metrics)) if callback is not None else False
        if bad_step:
            result.status = "diverged"
            result.reason = f"non-finite training loss at epoch {epoch}, step {bad_step}"
        elif not (_finite(train_loss) and _finite(val_loss)):
            result.status, result.reason = "diverged", f"non-finite loss at epoch {epoch}"
        elif max(train_loss, val_loss) > factor * lowest:
            result.status = "diverged"
            result.reason = (f"loss {max(train_loss, val_loss):.3g} at epoch {epoch} is more "
                             f"than {factor:g} x the lowest so far ({lowest:.3g})")
        elif stop:
            result.status, result.reason = "stopped", f"stopped by the caller after epoch {epoch}"
        elif limit > 0 and time.perf_counter() - start_wall > limit:
            result.status = "timeout"
            result.reason = f"time limit of {limit:g} s reached after epoch {epoch}"
        if result.status != "completed":
            break
        lowest = min(lowest, train_loss, val_loss)
    if result.status == "completed":
        result.reason = f"ran all {result.epochs} epochs"
    if result.best_state is not None:
        model.load_state_dict(result.best_state)
        if checkpoint_dir is not None:
            save_weights(result.best_state, Path(checkpoint_dir) / "best.pt")
    result.cpu_seconds = time.process_time() - start_cpu
    result.seconds = time.perf_counter() - start_wall
    return result
