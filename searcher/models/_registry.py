"""Name → implementation registries (radial bases, envelopes, activations, families).

A wrong name raises :class:`~searcher.errors.UserError` that lists every valid name, so a
typo in a study file is answered with the choices rather than a traceback.
"""
from __future__ import annotations

from typing import Callable, Generic, TypeVar

import torch

from searcher.errors import UserError
from searcher.options import REGISTERED, declared

__all__ = ["Registry", "ACTIVATIONS", "activation"]

T = TypeVar("T")


class Registry(Generic[T]):
    """A named table of implementations filled by a decorator.

    Args:
        what: what the entries are, used in error messages ("radial basis").
        key: dotted config key the names come from ("model.radial.basis").

    Example:
        >>> ACTS = Registry("activation", "model.activation")
        >>> @ACTS.register("tanh")
        ... def _tanh(): return torch.tanh
        >>> ACTS.get("tanh")() is torch.tanh
        True
    """

    def __init__(self, what: str, key: str) -> None:
        self.what = what
        self.key = key
        self._items: dict[str, T] = {}

    def register(self, name: str) -> Callable[[T], T]:
        if self.key in REGISTERED:      # the study language must know every name offered
            declared(self.key, name)

        def deco(obj: T) -> T:
            self._items[name] = obj
            return obj
        return deco

    def names(self) -> list[str]:
        return list(self._items)

    def get(self, name: str) -> T:
        if name not in self._items:
            raise UserError.single(
                f"unknown {self.what}: must be one of {', '.join(self.names())}, but got {name!r}",
                path=self.key)
        return self._items[name]


ACTIVATIONS: Registry[Callable[[torch.Tensor], torch.Tensor]] = Registry(
    "activation", "model.activation")
for _name, _fn in {"silu": torch.nn.functional.silu, "tanh": torch.tanh,
                   "gelu": torch.nn.functional.gelu,
                   "softplus": torch.nn.functional.softplus,
                   "relu": torch.relu}.items():
    ACTIVATIONS.register(_name)(_fn)


def activation(name: str) -> Callable[[torch.Tensor], torch.Tensor]:
    """The activation for even (0e) scalars named by ``model.activation``."""
    return ACTIVATIONS.get(name)

