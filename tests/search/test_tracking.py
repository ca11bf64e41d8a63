"""The tracker's batched writes, read back from a real MLflow sqlite store."""
from __future__ import annotations

import yaml
from mlflow import MlflowClient

from searcher.outcomes import TAGS
from searcher.search._tracking import Tracker, TrackingInfo, flatten
from searcher.search._urls import public_config


def _tracker(tmp_path):
    uri = f"sqlite:///{tmp_path / 'mlflow.db'}"
    client = MlflowClient(tracking_uri=uri)
    exp = client.create_experiment("t", artifact_location=(tmp_path / "art").as_uri())
    parent = client.create_run(exp, run_name="study-t")
    tracker = Tracker(TrackingInfo(uri, exp, parent.info.run_id, "t"))
    calls = []
    real = tracker.client

    class Counting:  # the real client, with its calls counted
        def __getattr__(self, name):
            method = getattr(real, name)

            def counted(*args, **kwargs):
                calls.append(name)
                return method(*args, **kwargs)
            return counted

    tracker.client = Counting()
    return tracker, client, calls


def _config(n_keys: int, text: str = "x") -> dict:
    return {"model": {f"k{i:03d}": f"{text}{i}" for i in range(n_keys)},
            "training": {"seed": 7, "epochs": 3}}


def _rows(epochs: int, names: int) -> list:
    return [(e, {f"m{j}": e + j / 10 for j in range(names)}) for e in range(1, epochs + 1)]


def test_a_small_trial_makes_three_calls_and_everything_is_stored(tmp_path):
    tracker, client, calls = _tracker(tmp_path)
    config = _config(40)
    run_id = tracker.start_trial(3, config)
    tracker.finish(run_id, outcome="completed", reason="ran all 3 epochs", config=config,
                   rows=_rows(3, 5))
    assert calls == ["create_run", "log_batch", "set_terminated"]
    run = client.get_run(run_id)
    assert run.info.status == "FINISHED"
    assert run.data.params == flatten(public_config(config))
    assert run.data.tags[TAGS["outcome"]] == "completed"
    assert run.data.tags[TAGS["trial"]] == "3"
    assert yaml.safe_load(run.data.tags[TAGS["config"]]) == public_config(config)
    # PyYAML's pure-Python emitter as the reference for the libyaml one the tracker uses
    assert run.data.tags[TAGS["config"]] == yaml.safe_dump(public_config(config),
                                                           sort_keys=False)
    history = client.get_metric_history(run_id, "m2")
    assert [(m.step, m.value) for m in history] == [(1, 1.2), (2, 2.2), (3, 3.2)]


def test_limits_per_call_split_params_and_metrics(tmp_path):
    # MLflow allows 100 params and tags together and 1000 entities per log_batch
    # (mlflow.utils.validation: MAX_PARAMS_TAGS_PER_BATCH, MAX_ENTITIES_PER_BATCH).
    tracker, client, calls = _tracker(tmp_path)
    config = _config(230)
    run_id = tracker.start_trial(0, config)
    tracker.log_metrics(run_id, _rows(10, 40))          # a flush: params go with it
    tracker.finish(run_id, outcome="pruned", reason="r", config=config, pruned_at=10,
                   rows=_rows(60, 40)[10:])                 # 2000 more entities
    run = client.get_run(run_id)
    assert run.data.params == flatten(public_config(config))
    assert len(client.get_metric_history(run_id, "m39")) == 60
    assert run.data.tags[TAGS["pruned_at"]] == "10"
    assert calls.count("log_batch") >= 5  # 232 params, 4400 metrics: several calls


def test_a_config_longer_than_a_tag_goes_to_an_artifact(tmp_path):
    tracker, client, calls = _tracker(tmp_path)
    config = _config(60, text="v" * 200)  # about 12 kB of YAML, over MLflow's 8000 characters
    run_id = tracker.start_trial(1, config)
    tracker.finish(run_id, outcome="failed", reason="boom", config=config)
    run = client.get_run(run_id)
    assert TAGS["config"] not in run.data.tags and run.info.status == "FAILED"
    path = client.download_artifacts(run_id, "config.yaml", str(tmp_path))
    assert yaml.safe_load(open(path).read()) == public_config(config)
    assert "log_text" in calls
