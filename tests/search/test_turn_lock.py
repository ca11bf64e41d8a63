"""The budget lock's patience after a holder that never releases it (a killed worker)."""
from __future__ import annotations

import threading

from searcher.search import _worker
from searcher.search._worker import TurnLock


class _Recording:
    """A real lock that records the timeout of every acquire."""

    def __init__(self) -> None:
        self.lock, self.timeouts = threading.Lock(), []

    def acquire(self, timeout):
        self.timeouts.append(timeout)
        return self.lock.acquire(timeout=timeout)

    def release(self):
        self.lock.release()


def test_patience_shrinks_after_a_dead_holder(monkeypatch):
    monkeypatch.setattr(_worker, "_LOCK_SECONDS", 0.05)
    monkeypatch.setattr(_worker, "_LOCK_RETRY_SECONDS", 0.01)
    lock = _Recording()
    turn = TurnLock(lock)
    assert turn.acquire() is True          # free: taken at once
    lock.release()
    lock.lock.acquire()                    # a holder that never releases (killed worker)
    assert turn.acquire() is False and turn.acquire() is False
    # the first turn waited the full patience, every later one only the short one
    assert lock.timeouts == [0.05, 0.05, 0.01]
