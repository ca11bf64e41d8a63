"""Optimisers and learning-rate schedules (per epoch, with linear warm-up).

* warm-up: epochs ``1..w`` use ``lr * e / (w + 1)``;
* ``constant``: ``lr`` afterwards;
* ``cosine``: ``lr * (1 + cos(pi * t / T)) / 2`` with ``t = e - w - 1`` and ``T = epochs - w``
  (Loshchilov & Hutter 2017, SGDR, one cycle without restarts);
* ``plateau``: halve the rate after :data:`PATIENCE` epochs without a new best validation
  loss (common practice), never below :data:`FLOOR` times ``lr``.
"""
from __future__ import annotations

import math

import torch

from searcher.errors import UserError

__all__ = ["make_optimiser", "Schedule", "OPTIMISERS", "SCHEDULES"]

OPTIMISERS = {"adam": torch.optim.Adam, "adamw": torch.optim.AdamW}
SCHEDULES = ("constant", "cosine", "plateau")
PATIENCE = 3
FLOOR = 1e-3


def make_optimiser(model: torch.nn.Module, training: dict) -> torch.optim.Optimizer:
    """Adam or AdamW over the model's parameters (``training.optimiser``)."""
    kind = training["optimiser"]
    if kind not in OPTIMISERS:
        raise UserError.single(f"must be one of {', '.join(OPTIMISERS)}, but got {kind!r}",
                               path="training.optimiser")
    params = [p for p in model.parameters() if p.requires_grad]
    # One fused kernel for every parameter (torch >= 2.4 on the CPU) instead of ~10 small
    # ops per tensor: 4-5x less optimiser time on the demo models (docs/benchmarks.md).
    # Same update rule; it needs floating parameters on one device, else the per-tensor loop.
    fused = bool(params) and all(p.is_floating_point() and p.device == params[0].device
                                 for p in params)
    return OPTIMISERS[kind](params or model.parameters(), lr=float(training["learning_rate"]),
                            weight_decay=float(training["weight_decay"]),
                            fused=True if fused else None)


class Schedule:
    """Sets the learning rate of an optimiser at the start of every epoch.

    Args:
        optimiser: the optimiser.
        training: the resolved ``training`` section.
    """

    def __init__(self, optimiser: torch.optim.Optimizer, training: dict) -> None:
        self.kind = training["schedule"]
        if self.kind not in SCHEDULES:
            raise UserError.single(f"must be one of {', '.join(SCHEDULES)}, but got "
                                   f"{self.kind!r}", path="training.schedule")
        self.optimiser = optimiser
        self.base = float(training["learning_rate"])
        self.warmup = int(training["warmup_epochs"])
        self.epochs = int(training["epochs"])
        self.scale = 1.0
        self.best = math.inf
        self.stale = 0

    def rate(self, epoch: int) -> float:
        """Learning rate of ``epoch`` (1-based)."""
        if epoch <= self.warmup:
            return self.base * epoch / (self.warmup + 1)
        if self.kind == "cosine":
            span = max(1, self.epochs - self.warmup)
            t = epoch - self.warmup - 1
            return self.base * 0.5 * (1.0 + math.cos(math.pi * t / span))
        return self.base * self.scale

    def start(self, epoch: int) -> float:
        """Apply the rate of ``epoch`` and return it."""
        lr = self.rate(epoch)
        for group in self.optimiser.param_groups:
            group["lr"] = lr
        return lr

    def end(self, epoch: int, val_loss: float) -> None:
        """Record ``val_loss`` of ``epoch`` (used by ``plateau``)."""
        if val_loss < self.best:
            self.best, self.stale = val_loss, 0
            return
        self.stale += 1
        if self.kind == "plateau" and epoch > self.warmup and self.stale >= PATIENCE:
            self.scale = max(FLOOR, self.scale * 0.5)
            self.stale = 0
