"""Real PostgreSQL servers for tests, through scripts/pg-test-server (never a mock).

``SEARCHER_TEST_PG_URL`` (exported by ``.ci/run``) names the shared server; when it is absent
and PostgreSQL is installed, :func:`shared_server` starts a private one for the session.
Without either, the tests that need it fail with a message saying what to do: a silently
skipped suite would hide a broken storage layer.
"""
from __future__ import annotations

import os
import socket
import subprocess
import uuid
from pathlib import Path
from urllib.parse import urlsplit, urlunsplit

import pytest

ROOT = Path(__file__).resolve().parents[1]
SCRIPT = ROOT / "scripts" / "pg-test-server"

__all__ = ["Server", "free_port", "shared_server", "fresh_database", "drop_database"]


class Server:
    """One cluster made by scripts/pg-test-server on ``port`` in ``folder`` (under /tmp: the
    postgres user must reach it)."""

    def __init__(self, port: int, folder: str) -> None:
        self.port, self.folder, self.url = port, folder, ""

    def _call(self, function: str) -> str:
        env = dict(os.environ, PG_TEST_PORT=str(self.port), PG_TEST_DIR=self.folder)
        proc = subprocess.run(["bash", "-c", f'source "{SCRIPT}" && {function} && '
                               'echo "${SEARCHER_TEST_PG_URL:-}"'], env=env,
                              capture_output=True, text=True, timeout=120)
        if proc.returncode:
            pytest.fail(f"scripts/pg-test-server {function} failed: {proc.stderr.strip()}")
        return proc.stdout.strip().splitlines()[-1] if proc.stdout.strip() else ""

    def start(self) -> str:
        self.url = self._call("pg_test_start")
        return self.url

    def halt(self) -> None:
        self._call("pg_test_halt")

    def resume(self) -> None:
        self._call("pg_test_resume")

    def stop(self) -> None:
        self._call("pg_test_stop")


def free_port() -> int:
    """A TCP port the OS reports free now (bind to port 0), so two servers never share one."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def installed() -> bool:
    return any(Path("/usr/lib/postgresql").glob("*/bin/initdb"))


def shared_server():
    """Yield the URL of the session's server (see the module docstring)."""
    url = os.environ.get("SEARCHER_TEST_PG_URL")
    if url:
        yield url
        return
    if not installed():
        pytest.fail("these tests need PostgreSQL: run .ci/run, or install the postgresql "
                    "package, or `source scripts/pg-test-server; pg_test_start` to export "
                    "SEARCHER_TEST_PG_URL")
    server = Server(free_port(), f"/tmp/searcher-pg-session-{os.getpid()}")
    yield server.start()
    server.stop()


def _with_db(url: str, name: str) -> str:
    parts = urlsplit(url)
    return urlunsplit(parts._replace(path=f"/{name}"))


def _admin(url: str, sql: str) -> None:
    import psycopg2

    conn = psycopg2.connect(url, connect_timeout=10)
    conn.autocommit = True  # CREATE/DROP DATABASE cannot run inside a transaction
    try:
        with conn.cursor() as cur:
            cur.execute(sql)
    finally:
        conn.close()


def fresh_database(url: str) -> str:
    """Create an empty database on the server of ``url``; returns its URL."""
    name = f"t_{uuid.uuid4().hex[:12]}"
    _admin(url, f'CREATE DATABASE "{name}"')
    return _with_db(url, name)


def drop_database(base: str, url: str) -> None:
    """Drop the database of ``url`` (connections still open are ended)."""
    name = urlsplit(url).path.lstrip("/")
    _admin(base, f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
