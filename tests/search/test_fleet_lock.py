"""The cross-host budget lock on a real PostgreSQL server."""
from __future__ import annotations

import threading

import optuna
import sqlalchemy

from searcher.search._fleet_lock import FleetLock, fleet_lock


def test_second_holder_waits_until_the_first_releases(pg_url):
    # pg_advisory_lock is exclusive per key across sessions (PostgreSQL manual, "Advisory
    # Locks"): the second acquire returns only after the first release.
    url = pg_url.replace("postgresql://", "postgresql+psycopg2://", 1)
    engine = sqlalchemy.create_engine(url)
    first, second = FleetLock(engine, "s"), FleetLock(engine, "s")
    order: list[str] = []
    first.acquire()
    worker = threading.Thread(target=lambda: (second.acquire(), order.append("second")))
    worker.start()
    # The second session is seen waiting in pg_locks (granted = false; PostgreSQL manual,
    # "pg_locks"): asked by the server, not inferred from a clock.
    watch = engine.connect()
    waiting = sqlalchemy.text("SELECT count(*) FROM pg_locks WHERE locktype = 'advisory' "
                              "AND NOT granted AND database = (SELECT oid FROM pg_database "
                              "WHERE datname = current_database())")
    for _ in range(6000):  # polls, not a time limit: the loop ends as soon as it waits
        if watch.execute(waiting).scalar():
            break
        threading.Event().wait(0.01)
    assert watch.execute(waiting).scalar() == 1 and worker.is_alive() and order == []
    watch.close()
    order.append("first released")
    first.release()
    worker.join()
    assert order == ["first released", "second"]
    second.release()
    other = FleetLock(engine, "another study")  # other studies are not blocked
    other.acquire()
    other.release()
    engine.dispose()


def test_only_postgresql_stores_get_a_fleet_lock(pg_url, tmp_path):
    url = pg_url.replace("postgresql://", "postgresql+psycopg2://", 1)
    on_pg = optuna.create_study(study_name="fleet", storage=url)
    assert isinstance(fleet_lock(on_pg), FleetLock)
    on_sqlite = optuna.create_study(storage=f"sqlite:///{tmp_path / 's.db'}")
    assert fleet_lock(on_sqlite) is None and fleet_lock(optuna.create_study()) is None
