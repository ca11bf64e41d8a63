"""A hand-written training loop, the way a strong user would write it: plain e3nn + PyTorch.

``scripts/bench`` times it against ``searcher.train.fit`` on the same module object, the
same initial weights and the same graphs (``loop_vs_reference``).  It is kept honest: the
edge geometry (spherical harmonics straight from ``e3nn.o3.spherical_harmonics`` and the
model's own radial embedding) is computed once, batches are collated once with fixed
membership and reshuffled in order each epoch, and each epoch ends with one validation pass,
the least a user needs to pick a best epoch.  Nothing here is slowed down on purpose.
"""
from __future__ import annotations

import torch
from e3nn import o3
from torch_geometric.data import Batch


def _collate(model: torch.nn.Module, graphs: list) -> Batch:
    batch = Batch.from_data_list(graphs)
    geometry = model.geometry
    with torch.no_grad():
        batch.edge_sh = o3.spherical_harmonics(geometry.sh.irreps_out, batch.edge_vec,
                                               normalize=True, normalization="component")
        batch.edge_rbf = geometry.radial(batch.edge_vec.norm(dim=-1))
    batch.edge_geometry = geometry.key  # tells the model the cached geometry is its own
    return batch


def train(model: torch.nn.Module, train_graphs: list, val_graphs: list, target: str, *,
          epochs: int, batch_size: int, learning_rate: float, clip: float,
          seed: int) -> list[float]:
    """Train ``model`` in place with Adam on the mean squared error; validation loss per epoch.

    Args:
        model: a built equivariant model (its ``geometry`` names the SH order and radial basis).
        train_graphs / val_graphs: lists of ``Data`` with the target field on them.
        target: the target field's name.
        epochs: epochs to run.
        batch_size: graphs per training batch (validation uses 4x as many).
        learning_rate: Adam's learning rate (constant).
        clip: gradient-norm clip (0 = off).
        seed: seeds the batch membership and the per-epoch order.
    """
    gen = torch.Generator().manual_seed(seed)
    order = torch.randperm(len(train_graphs), generator=gen).tolist()
    batches = [_collate(model, [train_graphs[i] for i in order[k:k + batch_size]])
               for k in range(0, len(order), batch_size)]
    step = 4 * batch_size
    val = [_collate(model, val_graphs[k:k + step]) for k in range(0, len(val_graphs), step)]
    opt = torch.optim.Adam(model.parameters(), lr=learning_rate)
    curve = []
    for _ in range(epochs):
        model.train()
        for i in torch.randperm(len(batches), generator=gen).tolist():
            batch = batches[i]
            opt.zero_grad(set_to_none=True)
            loss = torch.nn.functional.mse_loss(model(batch), batch[target])
            loss.backward()
            if clip > 0:
                torch.nn.utils.clip_grad_norm_(model.parameters(), clip)
            opt.step()
        model.eval()
        with torch.no_grad():
            sq = sum(float(((model(b) - b[target]) ** 2).sum()) for b in val)
            curve.append(sq / sum(b[target].numel() for b in val))
    return curve
