"""A lock shared by every worker of one study on a PostgreSQL store, on any host.

The budget check and the start of a trial must be one step, or two hosts that both see
"99 of 100 done" both start a trial.  Workers on one machine share a ``multiprocessing``
lock; workers on different hosts share a PostgreSQL session-level advisory lock keyed by the
study name.  PostgreSQL releases it by itself when a worker's connection dies, so a killed
worker never blocks the others.
"""
from __future__ import annotations

import hashlib

__all__ = ["FleetLock", "fleet_lock"]


class FleetLock:
    """``pg_advisory_lock`` on a dedicated connection of the study's storage engine."""

    def __init__(self, engine, study_name: str) -> None:
        digest = hashlib.sha256(f"searcher-budget:{study_name}".encode()).digest()
        self._key = int.from_bytes(digest[:8], "big", signed=True)
        self._engine = engine
        self._conn = None

    def acquire(self) -> None:
        from sqlalchemy import text

        if self._conn is None:
            self._conn = self._engine.connect()
        self._conn.execute(text("SELECT pg_advisory_lock(:k)"), {"k": self._key})
        self._conn.commit()

    def release(self) -> None:
        """Unlock; never raises.  If the unlock cannot be sent, the connection is discarded
        (not returned to the pool), which ends the session and so frees its lock."""
        if self._conn is None:
            return
        from sqlalchemy import text

        conn, self._conn = self._conn, None
        try:
            conn.execute(text("SELECT pg_advisory_unlock(:k)"), {"k": self._key})
            conn.commit()
            conn.close()
        except Exception:  # the database went away: its session, and the lock, with it
            conn.invalidate()


def fleet_lock(opt) -> FleetLock | None:
    """The cross-host lock of an Optuna study on PostgreSQL; None for other storages."""
    storage = getattr(opt, "_storage", None)
    backend = getattr(storage, "_backend", storage)
    engine = getattr(backend, "engine", None)
    if engine is None or engine.dialect.name != "postgresql":
        return None
    return FleetLock(engine, opt.study_name)
