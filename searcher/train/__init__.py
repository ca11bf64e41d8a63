"""One training run: optimiser, schedule, loss, per-irrep-block metrics, divergence,
checkpoints and a callback hook per epoch.  Never imports optuna or mlflow."""
from ._batches import TrainBatches, collate
from ._cases import CaseRows, case_errors, reassemble
from ._checkpoint import load_weights, save_weights
from ._collate import collate_graphs
from ._fidelity import fidelity_graphs
from ._fit import FitResult, fit, pick_device
from ._metrics import ZERO_BLOCK, BlockErrors, evaluate, target_blocks
from ._schedule import OPTIMISERS, SCHEDULES, Schedule, make_optimiser

__all__ = ["fit", "FitResult", "evaluate", "target_blocks", "BlockErrors", "ZERO_BLOCK",
           "collate", "collate_graphs", "TrainBatches", "CaseRows", "case_errors", "reassemble", "fidelity_graphs", "save_weights", "load_weights",
           "make_optimiser", "Schedule", "OPTIMISERS", "SCHEDULES", "pick_device"]

