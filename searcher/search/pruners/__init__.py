"""Our own pruners, one module each, on the small base :class:`BaseCurvePruner`.

``outlook`` (:class:`OutlookPruner`): learning-curve extrapolation with look-alike finished
curves.  Optuna's own pruners (median, percentile, halving, Hyperband) are built in
:mod:`searcher.search._registry`; every pruner of the registry passes the replay check in
:func:`searcher.testing.check_pruner_replay`.
"""
from ._base import BaseCurvePruner, curve_of
from ._outlook import OutlookPruner, crossing_prior, prob_beats

__all__ = ["BaseCurvePruner", "curve_of", "OutlookPruner", "crossing_prior", "prob_beats"]
