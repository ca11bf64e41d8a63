"""compare(): self-comparison, refusals, space differences, the CLI."""
from __future__ import annotations

import json

import optuna
import pytest

from searcher.analysis import compare, space_diff
from searcher.testing._planted import planted_study
from searcher.cli import main
from searcher.errors import UserError
from searcher.spec import load_study

BASE = """study:
  name: {name}
model:
  hidden:
    lmax: {lmax}
  radial:
    basis: {basis}
training:
  learning_rate: {{real: [0.0003, 0.03], log: true}}
search:
  sampler:
    kind: {sampler}
output:
  folder: {out}
"""


def _study(tmp_path, name, *, lmax="{whole: [1, 3]}", basis="{one_of: [bessel, gaussian]}",
           sampler="tpe", extra="", seed=0, rare=3):
    path = tmp_path / f"{name}.yaml"
    path.write_text(BASE.format(name=name, lmax=lmax, basis=basis, sampler=sampler,
                                out=tmp_path / f"out-{name}") + extra)
    study = load_study(path)
    journal = study.output_dir / "study.journal"
    journal.parent.mkdir(parents=True, exist_ok=True)
    store = optuna.storages.JournalStorage(optuna.storages.journal.JournalFileBackend(str(journal)))
    opt, _ = planted_study(n=40, rare=rare, seed=seed, name=name, storage=store)
    return study, opt


def test_self_comparison_shows_no_clear_difference(tmp_path):
    a = _study(tmp_path, "alpha")
    res = compare([a, a], out_dir=tmp_path / "cmp")
    assert res["verdicts"][0]["text"].startswith("no clear difference")
    lo, _, hi = res["verdicts"][0]["ratio_interval"]
    assert lo < 1 < hi  # derived: a study against itself has cost ratio 1
    # compare()'s default target: 10 × the best loss of all studies (README, compare)
    assert res["target"] == pytest.approx(10 * res["studies"][0]["best"])
    s = res["studies"][0]
    # derived: a Wilson score interval (Wilson 1927) always contains its observed proportion
    assert s["hit_interval"][0] <= s["hit_rate"] <= s["hit_interval"][1]
    assert all(v == [] for v in res["space_diffs"][0]["diff"].values())
    for name in ("expected-best-trials.png", "expected-best-compute.png", "hit-rates.png",
                 "compare.md", "compare.json"):
        assert (tmp_path / "cmp" / name).stat().st_size > 0
    assert "independent draws" in res["markdown"]


def test_space_diff_kinds(tmp_path):
    a, _ = _study(tmp_path, "alpha")
    b, _ = _study(tmp_path, "beta", lmax="{whole: [2, 3]}",
                  basis="{one_of: [bessel, gaussian, cosine]}", seed=1)
    c, _ = _study(tmp_path, "gamma", lmax="2", basis="bessel", seed=2)
    ab, ac = space_diff(a, b), space_diff(a, c)
    assert [e["name"] for e in ab["narrowed"]] == ["model.hidden.lmax"]
    assert [e["name"] for e in ab["widened"]] == ["model.radial.basis"]
    assert {e["name"] for e in ac["removed"]} == {"model.hidden.lmax", "model.radial.basis"}
    assert {e["name"] for e in space_diff(c, a)["added"]} == {"model.hidden.lmax",
                                                              "model.radial.basis"}


def test_random_control_is_marked(tmp_path):
    a = _study(tmp_path, "alpha")
    r = _study(tmp_path, "rand", sampler="random", seed=1)
    res = compare([a, r])
    assert [s["random_control"] for s in res["studies"]] == [False, True]
    assert "(random control)" in res["markdown"]


def test_other_task_refused_unless_forced(tmp_path):
    a = _study(tmp_path, "alpha")
    other = _study(tmp_path, "other", extra="task:\n  split:\n    seed: 3\n", seed=1)
    with pytest.raises(UserError) as err:
        compare([a, other])
    assert err.value.problems[0].path == "task.split.seed"
    assert "must share" in str(err.value) and "--force" in str(err.value)
    res = compare([a, other], force=True)
    assert res["warnings"] and "task.split.seed" in res["warnings"][0]


def test_cli_compare_and_analyze(tmp_path, capsys):
    a, _ = _study(tmp_path, "alpha")
    _study(tmp_path, "other", extra="task:\n  split:\n    seed: 3\n", seed=1)
    pa, po = str(tmp_path / "alpha.yaml"), str(tmp_path / "other.yaml")
    assert main(["compare", pa, po]) == 2
    assert "task.split.seed" in capsys.readouterr().err
    assert main(["compare", pa, pa, "--json", "--out", str(tmp_path / "c")]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["verdicts"][0]["text"].startswith("no clear difference")
    assert main(["analyze", pa, "--json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["study"] == "alpha" and (a.output_dir / "analysis" / "analysis.json").exists()
    missing = tmp_path / "none.yaml"
    missing.write_text(BASE.format(name="none", lmax=1, basis="bessel", sampler="tpe",
                                   out=tmp_path / "out-none"))
    assert main(["analyze", str(missing)]) == 2
    assert "journal must exist" in capsys.readouterr().err


@pytest.mark.parametrize("order", ["rich first", "poor first"])
def test_verdict_states_the_ratio_inside_its_interval(tmp_path, order):
    # A space with many deep trials against one with few: whichever way round they are given,
    # the verdict names the cheaper space and its point estimate lies inside the interval it
    # prints (a bootstrap percentile interval contains its median by construction).
    import re

    rich, poor = _study(tmp_path, "rich", rare=14), _study(tmp_path, "poor", rare=2, seed=1)
    pair = [rich, poor] if order == "rich first" else [poor, rich]
    text = compare(pair, out_dir=tmp_path / "cmp")["verdicts"][0]["text"]
    about = re.search(r"about ([0-9.e+]+)× (less|more)", text)
    lo, hi = (float(v.replace("∞", "inf")) for v in
              re.search(r"interval ([0-9.e+]+|∞)–([0-9.e+]+|∞)×", text).groups())
    assert about and lo <= float(about.group(1)) <= hi and lo > 1, text
    assert ("more" if order == "rich first" else "less") == about.group(2)


def test_check_comparable_refuses_warns_and_passes(tmp_path):
    from searcher.analysis import check_comparable

    a, _ = _study(tmp_path, "alpha")
    same, _ = _study(tmp_path, "beta", seed=2)
    other, _ = _study(tmp_path, "other", extra="task:\n  split:\n    seed: 3\n", seed=1)
    assert check_comparable([a, same], [{"h1"}, {"h1"}], force=False) == []
    with pytest.raises(UserError) as err:
        check_comparable([a, other], [set(), set()], force=False)
    assert [p.path for p in err.value.problems][0] == "task.split.seed"
    assert "--force" in str(err.value)
    warned = check_comparable([a, same], [{"h1"}, {"h2"}], force=True)
    assert len(warned) == 1 and warned[0].startswith("warning:") and "data_hash" in warned[0]
