"""One outcome contract: search's status and analysis count a recovered trial alike."""
from __future__ import annotations

import optuna

from searcher.analysis import count_outcomes, read_trials
from searcher.outcomes import OUTCOMES, STATE_OUTCOME, tally


def test_a_fail_trial_without_an_outcome_counts_as_interrupted_everywhere():
    study = optuna.create_study(storage=optuna.storages.InMemoryStorage())
    dead = study.ask()                      # its worker died: FAIL, no outcome attribute
    study.tell(dead, state=optuna.trial.TrialState.FAIL)
    done = study.ask()
    done.set_user_attr("outcome", "completed")
    study.tell(done, 0.5)
    trials = study.get_trials()
    by_search = tally(trials)
    by_analysis = count_outcomes(read_trials(study))
    assert by_search["interrupted"] == by_analysis["interrupted"] == 1
    assert by_search["failed"] == by_analysis["failed"] == 0
    assert set(STATE_OUTCOME.values()) <= set(OUTCOMES)


def test_the_contract_module_needs_no_torch():
    import subprocess
    import sys

    code = ("import sys, searcher.outcomes, searcher.errors; "
            "sys.exit(int('torch' in sys.modules))")
    assert subprocess.run([sys.executable, "-c", code]).returncode == 0
