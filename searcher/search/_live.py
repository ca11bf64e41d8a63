"""Progress while a study runs: a live panel on a terminal, plain lines otherwise.

The panel shows how many trials each outcome has, how many are in flight, the best loss so
far with a one-line summary of its config, the pace (trials per hour of this run) and the
time still ahead (to the trial budget at the current pace, or to the deadline if sooner).
Without a terminal, one line is printed per trial as it finishes.
"""
from __future__ import annotations

import sys
import time

from searcher.outcomes import best_record, finished, outcome_of, tally

__all__ = ["Monitor", "config_line"]


def config_line(config: dict | None) -> str:
    """One-line summary of a resolved config, e.g. ``gated l2 x8 3 layers bessel lr 3.1e-03``."""
    if not config:
        return "-"
    m, t = config["model"], config["training"]
    hidden = m["hidden"]["irreps"] or f"l{m['hidden']['lmax']} x{m['hidden']['multiplicity']}"
    return (f"{m['family']} {hidden} {m['layers']} layers {m['radial']['basis']}"
            f"{m['radial']['count']} lr {float(t['learning_rate']):.1e}")


def _clock(seconds: float) -> str:
    seconds = max(0, int(seconds))
    return f"{seconds // 3600}h{seconds % 3600 // 60:02d}m" if seconds >= 3600 else \
        f"{seconds // 60}m{seconds % 60:02d}s"


class Monitor:
    """Reads the store every ``interval`` seconds and shows where the study stands.

    Args:
        study: the loaded study.
        opt: its ``optuna.Study``.
        budget: trial budget (0 = none).
        deadline: ``time.time()`` deadline (0 = none).
        start: ``time.time()`` when this run began.
        live: rich panel (None: when stdout is a terminal).
        echo: print function for plain lines.
        storage: storage label shown in the panel.
    """

    def __init__(self, study, opt, *, budget: int, deadline: float, start: float,
                 live: bool | None, echo, storage: str) -> None:
        self.study, self.opt, self.budget, self.deadline = study, opt, budget, deadline
        self.start, self.echo, self.storage = start, echo, storage
        self.live = sys.stdout.isatty() if live is None else live
        self.interval = 1.0 if self.live else 2.0
        self.seen: set[int] = set()
        self.done_at_start: int | None = None
        self._panel = None

    def __enter__(self):
        trials = self.opt.get_trials(deepcopy=False)
        self.done_at_start = finished(trials)
        self.seen = {t.number for t in trials if t.state.is_finished()}
        if self.live:
            from rich.live import Live

            self._panel = Live(self._render(trials), refresh_per_second=2, transient=False)
            self._panel.__enter__()
        return self

    def __exit__(self, *exc):
        if self._panel is not None:
            self._panel.__exit__(*exc)

    def _eta(self, done: int) -> str:
        elapsed = time.time() - self.start
        ran = done - (self.done_at_start or 0)
        parts = []
        if self.budget and ran > 0:
            parts.append(f"budget in ~{_clock(elapsed / ran * max(0, self.budget - done))}")
        if self.deadline:
            parts.append(f"deadline in {_clock(self.deadline - time.time())}")
        return ", ".join(parts) or "open-ended"

    def _render(self, trials):
        from rich.panel import Panel
        from rich.table import Table

        counts, best = tally(trials), best_record(trials)
        done = finished(trials)
        hours = max(time.time() - self.start, 1e-9) / 3600.0
        table = Table.grid(padding=(0, 2))
        table.add_column(justify="right", style="bold")
        table.add_column()
        budget = f" of {self.budget}" if self.budget else ""
        table.add_row("trials", f"{done}{budget} counted, {counts['running']} in flight, "
                      f"{counts['waiting']} queued")
        table.add_row("outcomes", "  ".join(f"{k} {counts[k]}" for k in (
            "completed", "timeout", "pruned", "diverged", "rejected", "interrupted", "failed")))
        table.add_row("best", "-" if best is None else
                      f"{best['value']:.4g} (trial {best['number']})  {config_line(best['config'])}")
        table.add_row("pace", f"{(done - (self.done_at_start or 0)) / hours:.1f} trials/h")
        table.add_row("ahead", self._eta(done))
        return Panel(table, title=f"study {self.study.name}", subtitle=self.storage,
                     expand=False)

    def _line(self, t) -> str:
        outcome = outcome_of(t)
        value = t.user_attrs.get("best_value")
        value = f"{value:.4g}" if isinstance(value, float) else "-"
        where = f" at epoch {t.user_attrs['pruned_at']}" if outcome == "pruned" else ""
        return (f"trial {t.number:>4} {outcome}{where}  best {value}  "
                f"{config_line(t.user_attrs.get('config'))}")

    def update(self, final: bool = False) -> None:
        """Refresh the panel, or print lines for trials finished since the last call."""
        trials = self.opt.get_trials(deepcopy=False)
        if self._panel is not None:
            self._panel.update(self._render(trials))
            return
        for t in trials:
            if t.state.is_finished() and t.number not in self.seen:
                self.seen.add(t.number)
                self.echo(self._line(t))
        if final:
            counts, best = tally(trials), best_record(trials)
            self.echo("done: " + ", ".join(f"{k} {v}" for k, v in counts.items() if v))
            if best:
                self.echo(f"best: {best['value']:.4g} (trial {best['number']})  "
                          f"{config_line(best['config'])}")
