"""Cost model: hand-counted multiply-adds and parameters of tiny modules."""
from __future__ import annotations


from e3nn import o3

from searcher.models import build_model, count_madds, estimate_cost
from searcher.models._cost import tensor_product_madds
from searcher.models._irreps import BiasedTensorProduct
from searcher.testing import make_fields, model_config


def test_tensor_product_madds_hand_count():
    # 2x1o ⊗ 1x1o → 3x0e, one uvw path: pairs 2·1 = 2, CG(1,1,0) ∝ δ_ij has 3 non-zeros,
    # weights 2·1·3 = 6 applied once per output component (dim 1): 2·3 + 6·1 = 12.
    tp = o3.FullyConnectedTensorProduct("2x1o", "1x1o", "3x0e")
    assert tensor_product_madds(tp) == 12
    # 1x1o ⊗ 1x1o → 1x1e: CG(1,1,1) ∝ ε_ijk has 6 non-zeros; 1·6 + 1·3 = 9 (derived).
    assert tensor_product_madds(o3.FullyConnectedTensorProduct("1x1o", "1x1o", "1x1e")) == 9


def test_parameter_counts_by_hand():
    # o3.Linear 2x0e+1x1o → 3x0e+2x1o: weights 2·3 + 1·2 = 8, no biases (e3nn default);
    # multiply-adds 2·3·1 + 1·2·3 = 12.
    lin = o3.Linear("2x0e+1x1o", "3x0e+2x1o")
    assert sum(p.numel() for p in lin.parameters()) == 8
    assert count_madds(lin) == (0, 12)
    # 0e⊗0e→0e: 1·1·2 = 2 weights; 1o⊗0e→1o: 1·1·1 = 1; bias on the two 0e outputs: 2.
    tp = BiasedTensorProduct("1x0e+1x1o", "1x0e", "2x0e+1x1o")
    assert sum(p.numel() for p in tp.parameters()) == 5
    # node_mlp, 1 hidden layer of width 4: inputs velocity 3 + pressure 1 + gradient 3 = 7,
    # target 2e (5): Linear(7,4) 28+4, Linear(4,5) 20+5 → 57 parameters, 48 madds per node.
    fields = make_fields()
    model = build_model(model_config({"family": "node_mlp", "layers": 1, "width": 4}), fields,
                        "anisotropy")
    assert sum(p.numel() for p in model.parameters()) == 57
    assert count_madds(model) == (0, 48)


def test_estimate_cost_epoch_formula():
    fields = make_fields()
    model = build_model(model_config({"family": "gated", "hidden.multiplicity": 2,
                                      "layers": 1, "width": 8}), fields, "anisotropy")
    stats = {"graphs": 10, "nodes_mean": 12, "edges_mean": 60}
    cost = estimate_cost(model, stats, batch_size=2, repeats=1)
    assert cost.madds_per_edge > 0 and cost.madds_per_node > 0 and cost.step_ms > 0
    # forward + backward ≈ 3 forward passes (common practice)
    assert cost.madds_per_epoch == (cost.madds_per_edge * 60 + cost.madds_per_node * 12) * 10 * 3
    assert cost.to_dict()["params"] == sum(p.numel() for p in model.parameters())


def test_timed_steps_leave_the_model_as_it_was():
    # The step timing runs Adam on the model itself and restores it: parameters, batch-norm
    # statistics, gradients and the training flag are as before (bit for bit).
    import torch

    torch.manual_seed(0)
    model = build_model(model_config({"family": "gated", "hidden.multiplicity": 2,
                                      "layers": 1, "width": 8, "norm": "batch"}),
                        make_fields(), "anisotropy").eval()
    before = {k: v.clone() for k, v in model.state_dict().items()}
    estimate_cost(model, {"graphs": 4, "nodes_mean": 10, "edges_mean": 40}, batch_size=2,
                  repeats=2)
    assert not model.training
    assert all(p.grad is None for p in model.parameters())
    for key, value in model.state_dict().items():
        assert torch.equal(value, before[key]), key
