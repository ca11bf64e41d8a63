"""Mutated NPZ data files: each reads (exit 0) or is a located error (exit 2), never a crash."""
from __future__ import annotations

import json
import warnings

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ._harness import assert_read_or_located, run_cli

HEADER = {"velocity": {"kind": "vector", "role": "input", "level": "node"},
          "stress": {"kind": "symmetric_tensor", "role": "target", "level": "node"}}


def _arrays(n: int = 8) -> dict:
    rng = np.random.default_rng(0)
    s = rng.normal(size=(n, 3, 3))
    return {"pos": rng.uniform(size=(n, 3)), "velocity": rng.normal(size=(n, 3)),
            "stress": s + np.swapaxes(s, 1, 2), "header": np.array(json.dumps(HEADER))}


@st.composite
def mutated(draw):
    arrays = _arrays(draw(st.sampled_from([0, 1, 2, 8])))
    for _ in range(draw(st.integers(1, 3))):
        name = draw(st.sampled_from(sorted(arrays) + ["edge_index", "extra"]))
        action = draw(st.sampled_from(["delete", "shape", "nan", "dtype", "empty", "header"]))
        value = arrays.get(name, np.zeros((2, 3)))
        if action in ("nan", "dtype") and np.asarray(value).dtype.kind not in "fc":
            action = "header"  # text or a cast array: damage the header's JSON instead
        if action == "delete":
            arrays.pop(name, None)
        elif action == "shape":
            arrays[name] = np.resize(value, draw(st.sampled_from(
                [(3,), (8, 4), (8, 3, 2), (1, 1, 1, 1), (5, 9), (2, 8)])))
        elif action == "nan":
            bad = np.array(value, dtype=float, copy=True).reshape(-1)
            if bad.size:
                bad[draw(st.integers(0, bad.size - 1))] = draw(st.sampled_from(
                    [np.nan, np.inf, -np.inf, 1e308]))
            arrays[name] = bad.reshape(np.shape(value))
        elif action == "dtype":
            with np.errstate(all="ignore"), warnings.catch_warnings():
                warnings.simplefilter("ignore")
                arrays[name] = np.asarray(value).astype(draw(st.sampled_from(
                    ["int8", "complex64", "bool", "U3", "float16"])))
        elif action == "empty":
            arrays[name] = np.zeros((0,) + np.shape(value)[1:])
        else:
            arrays["header"] = np.array(draw(st.one_of(
                st.text(max_size=30), st.just("{\"velocity\": {\"kind\": \"spinor\"}}"),
                st.just("[1, 2]"), st.just("{\"stress\": 3}"),
                st.just(json.dumps({"v": {"kind": "vector", "role": "output"}})))))
    return arrays


@settings(max_examples=50, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(mutated())
def test_mutated_npz_reads_or_is_a_located_error(arrays):
    assert_read_or_located("fuzzed.npz", lambda path: np.savez(path, **arrays),
                           ["data", "inspect", "{path}"])


def test_npz_that_is_not_a_zip_is_a_located_error(tmp_path):
    for name, data in (("empty.npz", b""), ("noise.npz", b"PK\x03\x04" + b"\x00" * 50)):
        path = tmp_path / name
        path.write_bytes(data)
        code, out = run_cli(["data", "inspect", str(path)])
        assert code == 2 and "Traceback" not in out and name in out, out
