"""The Optuna study: samplers, pruners, storages, workers, budgets and deadlines, stale-trial
recovery, MLflow tracking and live progress.

Public API (DEVELOPERS.md, "Contracts/search"): :func:`open_store`, :func:`run_study`,
:func:`study_status`, :func:`rerun_config`, :func:`train_config`; the registries
:data:`SAMPLERS` and :data:`PRUNERS`; the outcome helpers of :mod:`searcher.outcomes`.
"""
from searcher.outcomes import OUTCOMES, VALUED, best_record, finished, outcome_of, tally

from ._keep import checkpoint_path, keep_best
from ._live import config_line
from ._recover import process_alive, recover
from ._registry import (PRUNERS, SAMPLERS, SEED_STRIDE, grid_space, make_pruner, make_sampler,
                        register_pruner, register_sampler, sampler_seed)
from ._train_outside import rerun_config, study_dataset, train_config
from ._runner import RunSummary, deadline_of, parse_until, run_study
from ._status import study_status
from ._store import make_storage, open_store, read_store, storage_down, storage_label
from ._tracking import (Tracker, TrackingInfo, find_study_run, flatten, prepare_tracking)
from ._trial import TrialRunner, guard_check, trial_seed
from ._urls import mask_url, public_config, tracking_uri
from .pruners import OutlookPruner, prob_beats

__all__ = [
    "prob_beats", "checkpoint_path", "keep_best", "OUTCOMES", "VALUED",
    "best_record", "finished", "outcome_of", "tally", "process_alive", "recover", "PRUNERS",
    "SAMPLERS", "SEED_STRIDE", "grid_space", "make_pruner", "make_sampler", "register_pruner",
    "register_sampler", "sampler_seed", "rerun_config", "study_dataset", "train_config",
    "RunSummary", "deadline_of", "parse_until", "run_study", "study_status", "make_storage",
    "open_store", "read_store", "storage_down", "storage_label", "Tracker", "TrackingInfo",
    "find_study_run", "flatten",
    "prepare_tracking", "TrialRunner", "guard_check", "trial_seed", "mask_url", "public_config", "tracking_uri",
    "OutlookPruner", "config_line",
]
