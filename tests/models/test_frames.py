"""Random training frames of the non-equivariant baselines (``model.augment``)."""
from __future__ import annotations

import copy

import numpy as np
import torch
from e3nn import o3

from searcher.models import build_model
from searcher.models._frames import random_frame
from searcher.testing import make_fields, model_config, random_graph

FIELDS = make_fields()
BASE = {"family": "coord_mlp", "layers": 1, "width": 8,
        "node_inputs": ["velocity", "pressure", "scaled_vorticity"]}


def test_frames_are_orthogonal_with_the_asked_determinant_and_centred():
    gen = torch.Generator().manual_seed(0)
    proper = torch.stack([random_frame("rotate", torch.float64, gen) for _ in range(1500)])
    both = torch.stack([random_frame("rotate_reflect", torch.float64, gen) for _ in range(1500)])
    eye = torch.eye(3, dtype=torch.float64)
    for r in (proper, both):
        assert torch.allclose(r @ r.transpose(1, 2), eye.expand_as(r), atol=1e-12)
    assert torch.all(torch.det(proper) > 0)
    mirrored = float((torch.det(both) < 0).double().mean())
    assert 0.4 < mirrored < 0.6          # Haar on O(3): half the mass is improper (derived)
    # Haar measure: E[R] = 0 (derived: invariance under R -> Q R for every Q); the mean of
    # 1500 draws has per-entry standard deviation sqrt(1/3)/sqrt(1500) ≈ 0.015.
    assert proper.mean(0).abs().max() < 0.08 and both.mean(0).abs().max() < 0.08


def test_a_turned_training_pass_is_the_model_on_the_turned_graph_turned_back():
    model = build_model(model_config({**BASE, "augment": "rotate_reflect"}), FIELDS,
                        "anisotropy").double()
    graph = random_graph(FIELDS, 12, 0, radius=0.6, dtype=torch.float64)
    torch.manual_seed(7)
    turned = model.train()(graph)
    torch.manual_seed(7)
    rot = random_frame("rotate_reflect", torch.float64)
    moved = copy.copy(graph)
    for name in BASE["node_inputs"]:
        moved[name] = getattr(graph, name) @ o3.Irreps(FIELDS[name].irreps).D_from_matrix(rot).T
    moved.edge_vec = graph.edge_vec @ rot.T
    d_out = o3.Irreps(FIELDS["anisotropy"].irreps).D_from_matrix(rot)
    assert torch.allclose(turned, model.eval()(moved) @ d_out, atol=1e-12)
    # In evaluation mode nothing is turned, and without augmentation neither in training.
    assert torch.equal(model.eval()(graph), model.eval()(graph))
    plain = build_model(model_config(BASE), FIELDS, "anisotropy").double()
    assert torch.equal(plain.train()(graph), plain.eval()(graph))
    assert not np.allclose(turned.detach().numpy(), model.eval()(graph).detach().numpy())
