"""A storage password never reaches logs, MLflow params or tags, reports or --json output.

A tiny study runs on the real PostgreSQL server with the dummy secret in its URL (trust
authentication: the server ignores it); then status, analyze and the dossier run, and every
byte they printed or wrote is searched for the secret.
"""
from __future__ import annotations

import os
import subprocess
import sys
from urllib.parse import urlsplit

import pytest

pytestmark = pytest.mark.slow


def _cli(*argv):
    proc = subprocess.run([sys.executable, "-m", "searcher", *argv], capture_output=True,
                          text=True, timeout=600, env=dict(os.environ, OMP_NUM_THREADS="1"))
    return proc.returncode, proc.stdout + proc.stderr


def test_password_appears_in_no_output(write_study, pg_url, tmp_path):
    secret = urlsplit(pg_url).password
    assert secret  # the URL carries one (scripts/pg-test-server)
    path = write_study({"model": {"family": "node_mlp"}, "training": {"epochs": 2},
                        "search": {"pruner": {"max_epochs": 2}, "budget": {"trials": 3},
                                   "storage": pg_url}}, name="secret")
    out_dir = tmp_path / "secret"
    texts = []
    for argv in (["run", str(path), "--plain"], ["status", str(path), "--json"],
                 ["status", str(path), "--storage", pg_url],
                 ["analyze", str(path), "--json"],
                 ["dossier", str(path), "--quick", "--json"]):
        code, text = _cli(*argv)
        assert code == 0 and "Traceback" not in text, (argv, text)
        texts.append(text)
    assert "postgres:***@" in texts[0] + texts[1]  # the masked form is what is shown
    assert not any(secret in t for t in texts)
    assert not (out_dir / "study.journal").exists()  # trials went to PostgreSQL
    files = [p for p in out_dir.rglob("*") if p.is_file()]
    assert any(p.name == "mlflow.db" for p in files) and any("dossier" in p.parts for p in files)
    leaked = [p for p in files if secret.encode() in p.read_bytes()]
    assert not leaked, leaked
    from searcher.search import read_store
    from searcher.spec import load_study

    stored = read_store(load_study(path)).get_trials()  # what the database itself holds
    assert len(stored) == 3 and secret not in repr([t.user_attrs for t in stored])
