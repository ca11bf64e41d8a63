"""``model.radial.cutoff: from_data`` and the warning for edges beyond the cutoff."""
from __future__ import annotations

import json
import warnings

import numpy as np
import pytest
import yaml

from searcher.cli import main
from searcher.data import build_dataset, check_cutoff
from searcher.errors import UserError
from searcher.models import CUTOFF_MARGIN, build_model, resolve_cutoff
from searcher.search import open_store, run_study
from searcher.spec import load_study
from searcher.testing import tiny_study_doc


def _write(tmp_path, name="c", **over):
    doc = tiny_study_doc(output={"folder": str(tmp_path / name)}, **over)
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return path


def _brute_force_lengths(graph) -> np.ndarray:
    """Every edge's length from positions alone: for each receiver, the distances to its
    k nearest other nodes by a full sort (derived: the neighbours rule's definition)."""
    pos = graph.pos.double().numpy()
    dst = graph.edge_index[1].numpy()
    k = int(np.bincount(dst).max())
    dist = np.linalg.norm(pos[:, None] - pos[None], axis=2)
    return np.sort(dist, axis=1)[:, 1:k + 1].reshape(-1)


def test_from_data_is_1_25_times_the_longest_neighbour_edge(tmp_path):
    study = load_study(_write(tmp_path, model={"radial": {"cutoff": "from_data"}}))
    cfg = study.fixed()
    assert cfg["model"]["radial"]["cutoff"] == "from_data"
    ds = build_dataset(cfg["task"])
    longest = max(_brute_force_lengths(g).max() for g in ds.graphs)
    # float32 positions: the stored lengths agree with float64 to ~1e-6 (derived)
    assert ds.stats["graphs"]["edge_len_max"] == pytest.approx(longest, rel=1e-5)
    target = ds.target.name
    model = build_model(cfg["model"], ds.fields, target, stats=ds.stats["graphs"])
    assert model.geometry.radial.cutoff == pytest.approx(CUTOFF_MARGIN * longest, rel=1e-5)
    # the longest edge keeps a fifth of its message: DimeNet's polynomial envelope, p = 6,
    # u(x) = 1 - 28x^6 + 48x^7 - 21x^8 at x = 1/1.25 (Gasteiger et al. 2020, eq. 8; derived)
    x = 1 / CUTOFF_MARGIN
    assert 1 - 28 * x**6 + 48 * x**7 - 21 * x**8 == pytest.approx(0.2031, abs=1e-4)
    with pytest.raises(UserError) as err:            # no data, no number
        resolve_cutoff(cfg["model"], None)
    assert err.value.problems[0].path == "model.radial.cutoff"


def test_from_data_with_local_scale_reads_the_local_longest_edge(tmp_path):
    study = load_study(_write(tmp_path, model={"radial": {"cutoff": "from_data",
                                                          "scale": "local"}}))
    ds = build_dataset(study.fixed()["task"])
    local = 0.0
    for g in ds.graphs:   # each edge over the mean length arriving at its receiver (derived)
        length = g.edge_len.double().numpy()
        dst = g.edge_index[1].numpy()
        mean = np.bincount(dst, weights=length)[dst] / np.bincount(dst)[dst]
        local = max(local, float((length / mean).max()))
    cfg = resolve_cutoff(study.fixed()["model"], ds.stats["graphs"])
    assert cfg["radial"]["cutoff"] == pytest.approx(CUTOFF_MARGIN * local, rel=1e-6)
    assert 1.0 < local < ds.stats["graphs"]["edge_len_max"] / min(
        float(g.edge_len.min()) for g in ds.graphs)


def test_a_bad_cutoff_word_is_a_located_error_naming_from_data(tmp_path):
    path = _write(tmp_path, model={"radial": {"cutoff": "longest"}})
    with pytest.raises(UserError) as err:
        load_study(path)
    (p,) = err.value.problems
    assert p.path == "model.radial.cutoff" and p.line > 0 and p.file == str(path)
    assert "'from_data'" in p.message and "a number in (0, inf" in p.message
    load_study(_write(tmp_path, "d", model={"radial": {"cutoff": {"one_of": [0.5, "from_data"]}}}))


def test_edges_beyond_the_cutoff_warn_once_with_count_and_longest(tmp_path):
    study = load_study(_write(tmp_path, model={"radial": {"cutoff": 0.9}}))
    ds = build_dataset(study.fixed()["task"])
    lengths = np.concatenate([_brute_force_lengths(g) for g in ds.graphs])
    beyond = int((lengths > 0.9 + 1e-6).sum())
    assert beyond > 0
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        assert check_cutoff(study, ds.graphs) == beyond
    (w,) = caught                                   # one warning for all the graphs
    assert f"{beyond} of {len(lengths)} edges are longer than model.radial.cutoff 0.9" \
        in str(w.message) and f"longest {lengths.max():.4g}" in str(w.message)
    # a searched cutoff is checked at its least value; from_data needs no check
    ranged = load_study(_write(tmp_path, "r", model={"radial": {"cutoff": {"real": [0.9, 4]}}}))
    assert ranged.least("model.radial.cutoff") == 0.9
    derived = load_study(_write(tmp_path, "f", model={"radial": {"cutoff": "from_data"}}))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        assert check_cutoff(derived, ds.graphs) == 0
    assert not caught


def test_inspect_names_long_edges_and_the_run_stores_the_derived_number(tmp_path, capsys):
    short = _write(tmp_path, "s", model={"radial": {"cutoff": 0.9}})
    assert main(["data", "inspect", str(short), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert any("longer than model.radial.cutoff 0.9" in w for w in report["warnings"])

    path = _write(tmp_path, "run", model={"radial": {"cutoff": "from_data"}},
                  search={"budget": {"trials": 1}})
    study = load_study(path)
    summary = run_study(study, live=False, echo=lambda *_: None)
    assert summary.exit_code == 0
    assert not any("longer than" in n for n in summary.notes)
    (trial,) = open_store(study).get_trials()
    longest = build_dataset(study.fixed()["task"]).stats["graphs"]["edge_len_max"]
    stored = trial.user_attrs["config"]["model"]["radial"]["cutoff"]
    assert stored == pytest.approx(CUTOFF_MARGIN * longest)   # the number, for exact re-runs
