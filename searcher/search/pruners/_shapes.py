"""The four curve shapes the outlook pruner mixes (Domhan, Springenberg & Hutter, IJCAI 2015).

Each shape is ``y(x) = c + a * phi(x; theta)`` on ``y = log10(loss)``; a shape gives ``phi``
and its derivative in ``theta``, a grid of starting values and bounds.  ``x`` is the epoch,
``u = x / X`` the fraction of the budget ``X``.  See :mod:`searcher.search.pruners._outlook` for
how each maps onto Domhan et al.'s families.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = ["Shape", "SHAPES"]


@dataclass(frozen=True)
class Shape:
    """One curve family: ``phi(x, u, theta) -> (phi [n], dphi/dtheta [n, m])``."""

    name: str
    grid: np.ndarray                     # [G, m] starting values of theta
    lower: tuple[float, ...]
    upper: tuple[float, ...]
    phi: Callable[[np.ndarray, np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


def _pow3(x, u, th):
    p = x ** -th[0]
    return p, (-np.log(x) * p)[:, None]


def _exp3(x, u, th):
    p = np.exp(-th[0] * u)
    return p, (-u * p)[:, None]


def _mmf(x, u, th):
    h, d = th
    r = u / h
    z = r ** d
    q = 1.0 / (1.0 + z)
    return q, np.stack([q * q * z * d / h, -q * q * z * np.log(r)], axis=1)


def _weibull(x, u, th):
    h, d = th
    r = u / h
    z = r ** d
    p = np.exp(-z)
    return p, np.stack([p * z * d / h, -p * z * np.log(r)], axis=1)


def _grid2(hs, ds):
    return np.array([(h, d) for h in hs for d in ds], dtype=float)


_HALF = np.geomspace(0.02, 2.0, 9)       # h: half-drop point as a fraction of the budget
_STEEP = np.array([0.7, 1.5, 3.0, 6.0])  # delta: steepness
SHAPES = (
    Shape("pow3", np.geomspace(0.05, 3.0, 10)[:, None], (0.01,), (6.0,), _pow3),
    Shape("exp3", np.geomspace(0.3, 60.0, 10)[:, None], (0.05,), (200.0,), _exp3),
    Shape("mmf", _grid2(_HALF, _STEEP), (0.005, 0.3), (5.0, 12.0), _mmf),
    Shape("weibull", _grid2(_HALF, _STEEP), (0.005, 0.3), (5.0, 12.0), _weibull),
)
