"""Bad command-line input: every case exits 2 with a located message, no traceback, and
nothing already stored is lost (DEVELOPERS.md, "Bad input")."""
from __future__ import annotations

import json
from pathlib import Path

import optuna
import pytest
import torch

import searcher
from searcher.testing._planted import planted_study
from searcher.cli import main
from searcher.errors import UserError, ensure_folder
from searcher.spec import load_study

STUDY = """study:
  name: {name}
model:
  family: coord_mlp
  hidden: {{multiplicity: 2, lmax: 1}}
  layers: 1
  width: 8
training:
  learning_rate: {{real: [0.0003, 0.03], log: true}}
output:
  folder: {out}
"""


def _write(tmp_path, name: str, out=None):
    path = tmp_path / f"{name}.yaml"
    path.write_text(STUDY.format(name=name, out=json.dumps(str(out or tmp_path / f"out-{name}"))))
    return path


@pytest.fixture
def stored(tmp_path):
    """``(study file, journal)`` of a study whose journal holds 40 planted trials."""
    path = _write(tmp_path, "kept")
    journal = load_study(path).output_dir / "study.journal"
    journal.parent.mkdir(parents=True)
    store = optuna.storages.JournalStorage(
        optuna.storages.journal.JournalFileBackend(str(journal)))
    planted_study(n=40, rare=3, seed=0, name="kept", storage=store)
    return path, journal


def _fails(argv, capsys, *needles) -> str:
    assert main([str(a) for a in argv]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    for needle in needles:
        assert str(needle) in err, (needle, err)
    return err


@pytest.fixture
def a_file(tmp_path):
    path = tmp_path / "taken"
    path.write_text("a file, not a folder")
    return path


def test_ensure_folder_names_key_and_path(tmp_path, a_file):
    assert ensure_folder(tmp_path / "a" / "b", "--out") == tmp_path / "a" / "b"
    assert (tmp_path / "a" / "b").is_dir()
    for bad in (a_file, a_file / "below"):  # an existing file, and a folder under a file
        with pytest.raises(UserError) as info:
            ensure_folder(bad, "output.folder", file="s.yaml")
        (problem,) = info.value.problems
        assert (problem.path, problem.file) == ("output.folder", "s.yaml")
        assert str(bad) in problem.message


@pytest.mark.parametrize("command", ["run", "analyze", "dossier"])
def test_out_on_a_file_exits_2_and_keeps_the_journal(command, stored, a_file, capsys):
    path, journal = stored
    before = journal.read_bytes()
    _fails([command, path, "--out", a_file], capsys, "[--out]", a_file)
    assert journal.read_bytes() == before


def test_compare_out_on_a_file(stored, a_file, capsys):
    path, journal = stored
    before = journal.read_bytes()
    _fails(["compare", path, path, "--out", a_file], capsys, "[--out]", a_file)
    assert journal.read_bytes() == before


def test_output_folder_on_a_file_names_the_study_key(tmp_path, a_file, capsys):
    path = _write(tmp_path, "lost", out=a_file)
    _fails(["run", path], capsys, "[output.folder]", path, a_file)
    _fails(["data", "export", "demo", "--out", a_file / "npz"], capsys, "[--out]", a_file)


@pytest.mark.parametrize("argv, key", [
    (["data", "export", "demo", "--seed", "-1"], "--seed"),
    (["check", "{study}", "--gate", "-1"], "--gate"),
    (["check", "{study}", "--samples", "-1"], "--samples"),
    (["analyze", "{study}", "--audit", "-2"], "--audit"),
    (["compare", "{study}", "{study}", "--target", "nan"], "--target"),
    (["compare", "{study}", "{study}", "--target", "inf"], "--target"),
    (["compare", "{study}", "{study}", "--target", "-0.5"], "--target"),
    (["compare", "{study}", "{study}", "--target", "0"], "--target"),
    (["run", "{study}", "--trials", "-1"], "--trials"),
    (["run", "{study}", "--hours", "nan"], "--hours"),
])
def test_bad_numbers_exit_2(argv, key, stored, tmp_path, capsys):
    path, journal = stored
    before = journal.read_bytes()
    out = tmp_path / "never-made"
    argv = [a.format(study=path) for a in argv]
    if argv[0] == "data":
        argv += ["--out", str(out)]
    _fails(argv, capsys, f"[{key}]")
    assert not out.exists()
    assert journal.read_bytes() == before


def test_dossier_of_a_study_that_never_ran_creates_nothing(tmp_path, capsys):
    path = _write(tmp_path, "never")
    output = load_study(path).output_dir
    _fails(["dossier", path], capsys, "[search.storage]", "run the study first")
    _fails(["dossier", path, "--out", tmp_path / "d"], capsys, "run the study first")
    assert not output.exists() and not (tmp_path / "d").exists()


def test_dossier_of_a_study_without_trials(tmp_path, capsys):
    path = _write(tmp_path, "empty")
    journal = load_study(path).output_dir / "study.journal"
    journal.parent.mkdir(parents=True)
    store = optuna.storages.JournalStorage(
        optuna.storages.journal.JournalFileBackend(str(journal)))
    optuna.create_study(study_name="empty", storage=store)
    before = journal.read_bytes()
    _fails(["dossier", path], capsys, path, "must have trials", "holds none")
    assert not (journal.parent / "dossier").exists()
    assert journal.read_bytes() == before


@pytest.fixture
def exported(tmp_path):
    """A choice.yaml + choice.pt + normaliser side file written by ``export_choice``."""
    from searcher.data import describe_fields
    from searcher.models import build_model
    from searcher.report import export_choice

    torch.manual_seed(0)
    config = load_study(_write(tmp_path, "chosen")).fixed()
    fields = describe_fields(config["task"])
    target = next(f.name for f in fields.values() if f.role == "target")
    state = build_model(config["model"], fields, target).state_dict()
    _, weights = export_choice(tmp_path / "choice", config, state, name="chosen",
                               summary="tiny", normaliser={})
    return weights


def test_load_model_reads_a_good_export(exported):
    assert searcher.load_model(exported).normaliser is not None


@pytest.mark.parametrize("damage", ["garbage", "truncated", "other-model"])
def test_load_model_bad_weights_name_the_file(exported, damage):
    if damage == "garbage":
        exported.write_bytes(b"not a torch file")
    elif damage == "truncated":
        exported.write_bytes(exported.read_bytes()[:200])
    else:
        torch.save({"bogus": torch.zeros(2)}, exported)
    with pytest.raises(UserError) as info:
        searcher.load_model(exported)
    assert info.value.problems[0].file == str(exported)


@pytest.mark.parametrize("text", ["{not json", "[1, 2]", '{"velocity": 3}'])
def test_load_model_bad_normaliser_names_the_file(exported, text):
    from searcher.report import normaliser_path

    side = normaliser_path(exported)
    side.write_text(text)
    with pytest.raises(UserError) as info:
        searcher.load_model(exported)
    assert info.value.problems[0].file == str(side)


def test_analyze_tracking_follows_the_environment(tmp_path, monkeypatch):
    from searcher.cli._analyze import _tracking

    study = load_study(_write(tmp_path, "tracked"))
    monkeypatch.delenv("MLFLOW_TRACKING_URI", raising=False)
    assert _tracking(study) is None  # no run made the default sqlite file: nothing to log to
    elsewhere = f"sqlite:///{tmp_path / 'elsewhere.db'}"
    monkeypatch.setenv("MLFLOW_TRACKING_URI", elsewhere)
    assert _tracking(study) is None  # a sqlite file no run has made is not created by reading
    (tmp_path / "elsewhere.db").touch()
    assert _tracking(study) == elsewhere
    monkeypatch.setenv("MLFLOW_TRACKING_URI", "http://tracking.lab:5000")
    assert _tracking(study) == "http://tracking.lab:5000"


def test_reading_a_mistyped_sqlite_storage_creates_nothing(tmp_path, capsys):
    # Reading must never create a store: connecting SQLAlchemy to a missing sqlite file would
    # create an empty database (common practice: read paths are side-effect free).
    study = Path(__file__).resolve().parents[2] / "studies" / "demo-narrow.yaml"
    missing = tmp_path / "typo.db"
    assert main(["status", str(study), "--storage", f"sqlite:///{missing}"]) == 1
    assert "has never run" in capsys.readouterr().err and not missing.exists()
    assert main(["analyze", str(study), "--storage", f"sqlite:///{missing}"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and str(missing) in err and not missing.exists()


@pytest.mark.parametrize("value", ["fast", "cuda", "e3nn"])
def test_unknown_kernel_route_in_the_environment_exits_2(monkeypatch, capsys, value):
    # SEARCHER_KERNELS takes "compiled" or "pytorch"; a typo must not quietly pick a route.
    monkeypatch.setenv("SEARCHER_KERNELS", value)
    assert main(["schema"]) == 2
    err = capsys.readouterr().err
    assert "SEARCHER_KERNELS" in err and "compiled, pytorch" in err and repr(value) in err
    assert "Traceback" not in err


@pytest.mark.parametrize("value, route", [("", "compiled"), ("compiled", "compiled"),
                                          (" PyTorch ", "pytorch")])
def test_known_kernel_routes_are_read_from_the_environment(value, route):
    from searcher.options import kernel_choice

    assert kernel_choice({"SEARCHER_KERNELS": value}) == route
    assert kernel_choice({}) == "compiled"
