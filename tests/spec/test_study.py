"""The compiled search space: sampling, Optuna suggestions, conditions, derived values."""
from __future__ import annotations

import math
import tempfile
from pathlib import Path

import optuna
import pytest
import yaml
from hypothesis import given, settings, strategies as st

from searcher.errors import UserError
from searcher.spec import config_hash, defaults, load_study

ROOT = Path(__file__).resolve().parents[2]
DEMO, NARROW = ROOT / "studies" / "demo.yaml", ROOT / "studies" / "demo-narrow.yaml"
optuna.logging.set_verbosity(optuna.logging.WARNING)


def _shape(tree):
    # nested key structure with leaves dropped: a resolved config must match defaults exactly
    return {k: _shape(v) if isinstance(v, dict) and k != "fields" else None for k, v in tree.items()}


def test_demo_space_summary():
    study = load_study(DEMO)
    names = [d.name for d in study.dimensions]
    assert study.name == "demo" and study.output_dir == Path("runs/demo")
    assert study.conditional_dimensions == ["model.radial.power"]
    # 2 families * 2 lmax * 3 mult * 2 taper * 2 parities * 3 node_attrs * 4 inputs *
    # 2 input_products * 2 invariants * 3 bases * 4 counts * 3 powers * 3 layers * 2 norms
    # (counted by hand from demo.yaml)
    assert study.discrete_size == 2 * 2 * 3 * 2 * 2 * 3 * 4 * 2 * 2 * 3 * 4 * 3 * 3 * 2
    assert names.index("model.edge_attrs.lmax") > names.index("model.hidden.lmax")
    assert {d.kind for d in study.dimensions} == {"choice", "int", "float", "derived"}


def test_resolved_config_has_exactly_the_default_keys():
    for path in (DEMO, NARROW):
        study = load_study(path)
        for cfg in study.sample(3, seed=1) + [study.fixed()]:
            assert _shape(cfg) == _shape(defaults())


def test_sampling_is_deterministic_and_seed_dependent():
    study = load_study(DEMO)
    first, again, other = study.sample(4, 0), load_study(DEMO).sample(4, 0), study.sample(4, 1)
    assert first == again and first != other
    assert [config_hash(c) for c in first] == [config_hash(c) for c in again]


def test_derived_values_follow_their_inputs():
    for cfg in load_study(DEMO).sample(12, seed=3):
        assert cfg["model"]["edge_attrs"]["lmax"] == max(cfg["model"]["hidden"]["lmax"], 2)
        assert cfg["model"]["radial"]["cutoff"] == 3.5       # fixed in studies/demo.yaml


def test_optuna_suggestions_resolve_back_to_the_same_config():
    study = load_study(DEMO)
    store = optuna.create_study(sampler=optuna.samplers.RandomSampler(seed=0))
    configs = []
    store.optimize(lambda trial: configs.append(study.suggest(trial)) or 0.0, n_trials=5)
    for trial, cfg in zip(store.trials, configs):
        assert study.resolve(trial.params) == cfg
        # list-valued choices reach Optuna as text labels such as "velocity+pressure_gradient"
        assert isinstance(trial.params["model.node_inputs"], str)
        assert "model.edge_attrs.lmax" not in trial.params  # derived values are not searched


def test_hash_ignores_prose_but_not_space(tmp_path):
    base = load_study(DEMO)
    text = DEMO.read_text().replace("extends: ../configs", f"extends: {ROOT}/configs")
    (tmp_path / "a.yaml").write_text(text.replace("team: flows-lab", "team: someone-else"))
    (tmp_path / "b.yaml").write_text(text.replace("whole: [1, 3]}", "whole: [1, 4]}"))
    assert load_study(tmp_path / "a.yaml").hash == base.hash
    assert load_study(tmp_path / "b.yaml").hash != base.hash
    assert base.hash != load_study(NARROW).hash and len(base.hash) == 64


def test_resolve_refuses_values_outside_the_space():
    study = load_study(NARROW)
    params = study.params_of(study.fixed())
    assert study.resolve(params) == study.fixed()
    with pytest.raises(UserError, match="outside the dimension"):
        study.resolve({**params, "model.hidden.multiplicity": 10})
    with pytest.raises(UserError, match="not a searched dimension"):
        study.resolve({**params, "model.layers": 3})
    with pytest.raises(UserError, match="active but has no value"):
        study.resolve({})


def test_extends_list_later_wins(tmp_path):
    (tmp_path / "one.yaml").write_text("model:\n  layers: 3\n  width: 16\n")
    (tmp_path / "two.yaml").write_text("model:\n  layers: 4\n")
    (tmp_path / "s.yaml").write_text("extends: [one.yaml, two.yaml]\nstudy:\n  name: s\n"
                                     "model:\n  radial: {count: 6}\n")
    cfg = load_study(tmp_path / "s.yaml").fixed()
    assert (cfg["model"]["layers"], cfg["model"]["width"], cfg["model"]["radial"]["count"]) == (4, 16, 6)


# ----- random valid spaces ---------------------------------------------------------------

@st.composite
def spaces(draw):
    """A study mixing every dimension form, with a condition and a derived value."""
    lo, step, n = draw(st.integers(1, 6)), draw(st.integers(1, 3)), draw(st.integers(1, 4))
    w_lo = draw(st.integers(1, 64))
    w_hi = w_lo + draw(st.integers(1, 512))
    lr_lo = draw(st.floats(1e-6, 1e-2))
    wd_hi = draw(st.floats(1e-3, 1.0))
    envelopes = draw(st.sampled_from([["polynomial", "cosine"], ["cosine", "polynomial"]]))
    p_lo = draw(st.integers(1, 10))
    model = {
        "family": {"one_of": draw(st.lists(st.sampled_from(["steerable", "gated", "node_mlp"]),
                                           min_size=1, max_size=3, unique=True))},
        "layers": {"whole": [lo, lo + step * n], "step": step},
        "width": {"whole": [w_lo, w_hi], "log": True},
        "hidden": {"lmax": 2},
        "radial": {"envelope": {"one_of": envelopes},
                   "power": {"whole": [p_lo, p_lo + 2 * draw(st.integers(1, 5))], "step": 2,
                             "only_if": {"model.radial.envelope": "polynomial"}},
                   "count": {"derive": "max(2, model.layers * 2)"}},
        "node_inputs": {"one_of": [["velocity"], ["pressure", "velocity"]]},
    }
    training = {"learning_rate": {"real": [lr_lo, lr_lo * 100], "log": True},
                "weight_decay": {"real": [0.0, wd_hi]}}
    return {"study": {"name": "random-space"}, "model": model, "training": training}


@settings(max_examples=30, deadline=None)
@given(spaces(), st.integers(0, 2 ** 31 - 1))
def test_random_spaces_sample_inside_bounds(space, seed):
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "space.yaml"
        path.write_text(yaml.safe_dump(space))
        study = load_study(path)
    dims = {d.name: d for d in study.dimensions}
    assert study.conditional_dimensions == ["model.radial.power"]
    power_default = defaults()["model"]["radial"]["power"]
    for cfg in study.sample(8, seed):
        model, training = cfg["model"], cfg["training"]
        lo, hi = space["model"]["layers"]["whole"]
        assert lo <= model["layers"] <= hi
        assert (model["layers"] - lo) % space["model"]["layers"]["step"] == 0
        w_lo, w_hi = space["model"]["width"]["whole"]
        assert w_lo <= model["width"] <= w_hi and isinstance(model["width"], int)
        lr_lo, lr_hi = space["training"]["learning_rate"]["real"]
        assert lr_lo <= training["learning_rate"] <= lr_hi and training["learning_rate"] > 0
        assert 0.0 <= training["weight_decay"] <= space["training"]["weight_decay"]["real"][1]
        assert model["family"] in space["model"]["family"]["one_of"]
        assert model["radial"]["count"] == max(2, model["layers"] * 2)
        if model["radial"]["envelope"] == "polynomial":
            assert dims["model.radial.power"].contains(model["radial"]["power"])
        else:  # inactive: the dimension's default (the key's default when it lies inside)
            assert model["radial"]["power"] == dims["model.radial.power"].default
            assert dims["model.radial.power"].default == (
                power_default if dims["model.radial.power"].contains(power_default)
                else dims["model.radial.power"].lo)
        assert isinstance(training["learning_rate"], float) and math.isfinite(training["weight_decay"])
