"""The training loop on a tiny real dataset: statuses, determinism, metrics, schedules."""
from __future__ import annotations

import copy
import math

import pytest
import torch
from scipy.spatial import cKDTree

from searcher.data import build_dataset
from searcher.models import build_model
from searcher.testing import tiny_fit_config
from searcher.train import (BlockErrors, Schedule, evaluate, fidelity_graphs, fit, load_weights,
                            make_optimiser, save_weights, target_blocks)


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    cfg = tiny_fit_config(seed=3, epochs=3)
    data = build_dataset(cfg["task"], cache_dir=tmp_path_factory.mktemp("cache"))
    return cfg, data


def _fit(cfg, data, **kw):
    torch.manual_seed(cfg["training"]["seed"])
    model = build_model(cfg["model"], data.fields, data.target.name)
    return model, fit(model, data, cfg, **kw)


def test_fit_completes_and_keeps_the_best_epoch(setup, tmp_path):
    cfg, data = setup
    model, res = _fit(cfg, data, checkpoint_dir=tmp_path)
    assert res.status == "completed" and res.epochs == 3 and len(res.curve) == 3
    assert res.best_value == min(res.curve) and res.curve[res.best_epoch - 1] == res.best_value
    keys = {"train_loss", "val_loss", "lr", "seconds"} | {f"val_rel_l2/{b}" for b, _ in
                                                          target_blocks(data.target.irreps)}
    assert all(set(h) == keys for h in res.history)
    # the model now holds the best weights: its validation loss is the best value
    _, val = fidelity_graphs(data, cfg)
    assert evaluate(model, val, data)["loss"] == pytest.approx(res.best_value, rel=1e-5)
    saved = load_weights(tmp_path / "best.pt")
    assert all(torch.equal(saved[k], v) for k, v in res.best_state.items())


def test_same_seed_same_curve(setup):
    cfg, data = setup
    assert _fit(cfg, data)[1].curve == _fit(cfg, data)[1].curve


def test_absurd_rate_diverges_and_callback_stops(setup):
    cfg, data = setup
    wild = copy.deepcopy(cfg)
    wild["training"].update(learning_rate=1.0e4, clip=0.0, epochs=6)
    res = _fit(wild, data)[1]
    assert res.status == "diverged" and f"epoch {res.epochs}" in res.reason
    res = _fit(cfg, data, callback=lambda epoch, m: epoch == 2)[1]
    assert res.status == "stopped" and res.epochs == 2
    quick = copy.deepcopy(cfg)
    quick["training"]["time_limit"] = 1e-9
    assert _fit(quick, data)[1].status == "timeout"


class _Loud(torch.nn.Module):
    """A model whose outputs start 1e3 times too large and can barely move (lr 1e-9)."""

    def __init__(self, inner):
        super().__init__()
        self.inner = inner

    def forward(self, batch):
        return 1e3 * self.inner(batch)


def test_run_that_starts_huge_is_diverged(setup):
    # A run that never comes within diverge_factor of predicting zero has not learned:
    # the "100x above its best" rule measured from the trivial predictor (common practice).
    cfg, data = setup
    slow = copy.deepcopy(cfg)
    slow["training"].update(learning_rate=1e-9, clip=0.0)
    torch.manual_seed(0)
    inner = build_model(cfg["model"], data.fields, data.target.name)
    with torch.no_grad():
        for p in inner.parameters():
            p.add_(0.5)  # no zero-output initialisation to hide behind
    res = fit(_Loud(inner), data, slow)
    assert res.status == "diverged" and "epoch 1 " in res.reason


def test_fidelity_subsamples_and_rebuilds_edges(setup):
    cfg, data = setup
    low = copy.deepcopy(cfg)
    low["task"]["fidelity"].update(train_fraction=0.5, probes=6)
    train, val = fidelity_graphs(data, low)
    assert len(train) == math.ceil(0.5 * len(data.split["train"]))
    for g in train + val:
        assert g.pos.shape[0] == 6
        # reference: scipy's cKDTree, 4 nearest neighbours of each node (itself excluded)
        _, idx = cKDTree(g.pos.numpy()).query(g.pos.numpy(), k=5)
        want = {(int(j), i) for i in range(6) for j in idx[i][1:]}
        got = {(int(s), int(d)) for s, d in g.edge_index.t()}
        assert got == want
        assert torch.allclose(g.edge_vec, g.pos[g.edge_index[0]] - g.pos[g.edge_index[1]])


class _Identity:
    @staticmethod
    def invert(name, values):
        return values


class _Data:
    """Only what BlockErrors reads: the target field and a normaliser."""

    class target:  # noqa: N801
        name, irreps = "t", "0e+2e"

    normaliser = _Identity()


def test_block_errors_match_the_definition():
    true = torch.tensor([[0.0, 1.0, 2.0, 0.0, 0.0, 0.0], [0.0, 0.0, 0.0, 3.0, 0.0, 4.0]])
    pred = true + torch.tensor([[0.5, 0.0, 1.0, 0.0, 0.0, 0.0], [0.0] * 6])
    acc = BlockErrors(_Data)
    acc.add(pred, true)
    m = acc.measures()
    # relative L2 = ||p - t|| / ||t|| (definition): ||(0,1,0,0,0, 0...)|| / sqrt(1+4+9+16)
    assert m["2e"] == ("rel_l2", pytest.approx(1.0 / math.sqrt(30.0)))
    # the 0e block is all zero: RMS error instead, sqrt(0.25 / 2)
    assert m["0e"] == ("rms", pytest.approx(math.sqrt(0.125)))
    assert acc.loss == pytest.approx((0.25 + 1.0) / 12)


def test_cosine_schedule_with_warmup():
    opt = torch.optim.SGD([torch.nn.Parameter(torch.zeros(1))], lr=1.0)
    sch = Schedule(opt, {"schedule": "cosine", "learning_rate": 1.0, "warmup_epochs": 1,
                         "epochs": 5})
    # warm-up e/(w+1), then SGDR (Loshchilov & Hutter 2017) (1 + cos(pi t / T)) / 2, T = 4
    want = [0.5] + [0.5 * (1 + math.cos(math.pi * t / 4)) for t in range(4)]
    assert [sch.start(e) for e in range(1, 6)] == pytest.approx(want)
    assert opt.param_groups[0]["lr"] == pytest.approx(want[-1])


def test_constant_schedule_with_warmup():
    opt = torch.optim.SGD([torch.nn.Parameter(torch.zeros(1))], lr=1.0)
    sch = Schedule(opt, {"schedule": "constant", "learning_rate": 0.1, "warmup_epochs": 2,
                         "epochs": 5})
    # derived from the module's rule: linear warm-up lr e/(w+1) for e <= w, then lr
    assert [sch.start(e) for e in range(1, 6)] == pytest.approx([0.1 / 3, 0.2 / 3, 0.1, 0.1, 0.1])
    for e in range(1, 6):
        sch.end(e, 1.0)  # never a new best after epoch 1: a constant schedule ignores it
    assert sch.start(6) == pytest.approx(0.1)


def test_plateau_schedule_halves_after_patience_and_stops_at_the_floor():
    opt = torch.optim.SGD([torch.nn.Parameter(torch.zeros(1))], lr=1.0)
    sch = Schedule(opt, {"schedule": "plateau", "learning_rate": 0.1, "warmup_epochs": 0,
                         "epochs": 100})
    # losses 1.0, 0.9 (new bests), then three epochs without a better one: PATIENCE = 3
    # (common practice), so the rate halves from epoch 6 on (derived: 0.1 / 2).
    for e, loss in enumerate([1.0, 0.9, 0.95, 0.95], start=1):
        assert sch.start(e) == pytest.approx(0.1)
        sch.end(e, loss)
    assert sch.start(5) == pytest.approx(0.1)
    sch.end(5, 0.95)
    assert sch.start(6) == pytest.approx(0.05)
    sch.end(6, 0.5)  # a new best resets the count, not the rate
    for e in (7, 8):
        assert sch.start(e) == pytest.approx(0.05)
        sch.end(e, 0.6)
    assert sch.start(9) == pytest.approx(0.05)
    for e in range(9, 100):
        sch.end(e, 0.6)
    # 30 halvings would give 0.1 * 2**-30; the floor FLOOR = 1e-3 of lr stops it at 1e-4
    assert sch.start(100) == pytest.approx(1e-4)


@pytest.mark.parametrize("kind,want", [("adam", 0.9), ("adamw", 0.999)])
def test_adamw_decays_weights_apart_from_the_gradient(kind, want):
    # One step from p = 1 with a zero loss gradient, lr 0.1, weight decay 0.01.  AdamW
    # (Loshchilov & Hutter, ICLR 2019) decays the weight itself: p = 1 - lr * wd = 0.999,
    # and its Adam step is 0 (zero moments).  Adam adds wd * p to the gradient, whose first
    # bias-corrected step is lr * g / |g| = lr: p = 0.9 (derived; Kingma & Ba 2015, eps aside).
    model = torch.nn.Linear(1, 1, bias=False)
    with torch.no_grad():
        model.weight.fill_(1.0)
    opt = make_optimiser(model, {"optimiser": kind, "learning_rate": 0.1, "weight_decay": 0.01})
    assert type(opt) is {"adam": torch.optim.Adam, "adamw": torch.optim.AdamW}[kind]
    (0.0 * model.weight.sum()).backward()
    opt.step()
    assert float(model.weight.detach()) == pytest.approx(want, abs=1e-6)


def test_weights_round_trip(tmp_path):
    state = {"w": torch.arange(4.0)}
    assert torch.equal(load_weights(save_weights(state, tmp_path / "a.pt"))["w"], state["w"])
