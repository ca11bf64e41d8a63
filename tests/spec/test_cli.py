"""``searcher check`` and ``searcher schema`` as a user runs them."""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

from searcher.cli import main

ROOT = Path(__file__).resolve().parents[2]
MALFORMED = Path(__file__).parent / "malformed"


def _run(*args):
    return subprocess.run([sys.executable, "-m", "searcher", *args], cwd=ROOT,
                          capture_output=True, text=True)


def test_invalid_study_exits_2_without_traceback():
    done = _run("check", str(MALFORMED / "multiple_errors.yaml"))
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "multiple_errors.yaml:6:19: [model.layers] inverted range" in done.stderr
    assert done.stderr.count("\n") >= 4  # every problem, one per line


def test_invalid_study_json():
    done = _run("check", str(MALFORMED / "derive_unknown.yaml"), "--json")
    assert done.returncode == 2 and "Traceback" not in done.stderr
    out = json.loads(done.stdout)
    assert out["valid"] is False
    (error,) = out["errors"]
    assert {k: error[k] for k in ("path", "line", "column")} == \
        {"path": "model.edge_attrs.lmax", "line": 5, "column": 20}
    assert error["file"].endswith("derive_unknown.yaml") and "lmx" in error["message"]


@pytest.mark.parametrize("study", ["studies/demo.yaml", "studies/demo-narrow.yaml"])
def test_shipped_studies_check(study, capsys):
    assert main(["check", study, "--json", "--samples", "2"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["valid"] is True and out["errors"] == []
    assert out["dimensions"] == len(out["dimension_names"]) and len(out["samples"]) == 2
    assert set(out["samples"][0]) == {"study", "task", "model", "training", "search",
                                      "tracking", "output"}


def test_sampling_deterministic_across_processes():
    first = _run("check", "studies/demo.yaml", "--json", "--samples", "3", "--seed", "5")
    second = _run("check", "studies/demo.yaml", "--json", "--samples", "3", "--seed", "5")
    assert first.returncode == 0 and first.stdout == second.stdout


def test_human_output(capsys):
    assert main(["check", "studies/demo.yaml", "--samples", "2"]) == 0
    out = capsys.readouterr().out
    # Derived: the choice sizes listed in studies/demo.yaml (learning_rate is the one real
    # dimension; edge_attrs.lmax is the one derived dimension).
    sizes = {"family": 2, "hidden.lmax": 2, "hidden.multiplicity": 3, "hidden.taper": 2,
             "hidden.parity": 2, "node_attrs": 3, "node_inputs": 4, "input_products": 2,
             "edge_invariants": 2, "radial.basis": 3, "radial.count": 4, "radial.power": 3,
             "layers": 3, "norm": 2}
    searched = len(sizes) + 1
    assert f"dimensions: {searched + 1} ({searched} searched, 1 derived)" in out
    # the discrete part is the product of the choice sizes
    assert f"discrete part: {math.prod(sizes.values())} combinations" in out
    assert "conditional: model.radial.power  (only if model.radial.envelope = polynomial)" in out
    assert out.count("\nsample ") == 2


def test_missing_file(capsys):
    assert main(["check", "studies/no-such.yaml"]) == 2
    assert "cannot read file" in capsys.readouterr().err


def test_schema_command(capsys):
    assert main(["schema", "--compact"]) == 0
    schema = json.loads(capsys.readouterr().out)
    assert schema["$schema"].endswith("2020-12/schema") and "model" in schema["properties"]


@pytest.mark.parametrize("args", [["--help"], ["check", "--help"], ["schema", "--help"]])
def test_help_has_purpose_and_examples(args, capsys):
    with pytest.raises(SystemExit) as info:
        main(args)
    out = capsys.readouterr().out
    assert info.value.code == 0 and "examples:" in out


@pytest.mark.slow
def test_gate_results_are_attached(capsys):
    # real models layer (torch/e3nn), imported only for --gate
    assert main(["check", "studies/demo-narrow.yaml", "--json", "--samples", "2", "--gate", "1"]) == 0
    out = json.loads(capsys.readouterr().out)
    gate = out["samples"][0]["gate"]
    assert gate["passed"] is True and gate["params"] > 0 and "gate" not in out["samples"][1]
    assert main(["check", "studies/demo-narrow.yaml", "--samples", "1", "--gate", "1"]) == 0
    assert "equiv. error f64" in capsys.readouterr().out
