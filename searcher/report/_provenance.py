"""Where a dossier came from: package versions, git commit, hashes, host and dates."""
from __future__ import annotations

import platform
import socket
import subprocess
import sys
from datetime import datetime, timezone
from importlib import metadata
from pathlib import Path

__all__ = ["PACKAGES", "git_commit", "now_utc", "package_versions", "provenance"]

PACKAGES = ("searcher", "torch", "e3nn", "torch-geometric", "optuna", "mlflow", "numpy",
            "scipy", "scikit-learn", "matplotlib", "jinja2", "pyyaml")


def now_utc() -> str:
    """ISO 8601 timestamp in UTC, to the second."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def package_versions(names=PACKAGES) -> dict[str, str]:
    """Installed version of each package (``"not installed"`` when absent)."""
    out = {}
    for name in names:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def git_commit(where: Path) -> str:
    """``git rev-parse HEAD`` of the repository holding ``where``; "" outside git or without git."""
    try:
        done = subprocess.run(["git", "rev-parse", "HEAD"], cwd=where, capture_output=True,
                              text=True, timeout=10, check=False)
    except (OSError, subprocess.SubprocessError):
        return ""
    return done.stdout.strip() if done.returncode == 0 else ""


def provenance(*, study_path: Path, study_hash: str, data_hash: str, started: str,
               device: str) -> dict:
    """Everything needed to tell later where and how the dossier's numbers were made.

    Args:
        study_path: the study file (its folder is asked for a git commit).
        study_hash: ``Study.hash``.
        data_hash: ``Dataset.hash``.
        started: when the dossier began (``now_utc()``).
        device: the torch device the re-runs used.
    """
    return {
        "study_file": str(Path(study_path).resolve()),
        "study_hash": study_hash,
        "data_hash": data_hash,
        "git_commit": git_commit(Path(study_path).resolve().parent),
        "packages": package_versions(),
        "python": sys.version.split()[0],
        "host": socket.gethostname(),
        "platform": platform.platform(),
        "device": device,
        "started": started,
        "finished": now_utc(),
    }
