"""``searcher dossier`` on the command line: bad settings exit 2 without a traceback."""
from __future__ import annotations

from searcher.cli import main


def test_bad_seed_count_exits_2(study_file, capsys):
    assert main(["dossier", str(study_file), "--seeds", "0"]) == 2
    err = capsys.readouterr().err
    assert "--seeds must be at least 1" in err and "Traceback" not in err


def test_missing_study_file_exits_2(tmp_path, capsys):
    assert main(["dossier", str(tmp_path / "none.yaml")]) == 2
