"""The gate nonlinearity in a handful of ops: e3nn's ``nn.Gate``, same math, same modules.

e3nn evaluates a gate as an ``Extract`` (one slice per block of its sorted input), one
``Activation`` (a slice and an activation per block), a weightless element-wise tensor
product of the gated blocks with the activated gates (generated einsum code) and a
concatenation: 20-40 small ops forward, and in the backward pass every slice zero-fills a
gradient the size of the whole input.  Here, with the gate's own activation modules
(``normalize2mom`` wrappers, so the constants are e3nn's)::

    x[:, perm]  ->  split once into (scalar blocks..., gates, gated)
    out = cat(act_k(scalars_k)..., gated * act_g(gates)[:, expand])

``perm`` orders the input's columns as the output wants them (it is skipped when it is the
identity, as it is for most hidden irreps); ``expand`` repeats gate ``j`` over the ``2l+1``
components of gated copy ``j``.  e3nn's product of an order-``l`` copy with a ``0e`` scalar
is ``C(l, 0, l) = I / sqrt(2l+1)`` times its component normalisation ``sqrt(2l+1)``, the
plain product, so the two agree to rounding (tests compare outputs and gradients to 1e-12 in
float64).

:func:`fuse_gate` switches a gate in place (its class becomes :class:`FusedGate`, which
overrides ``forward`` only), so parameters, buffers and state-dict keys stay e3nn's.
"""
from __future__ import annotations

import torch
from e3nn import nn as enn

__all__ = ["FusedGate", "fuse_gate", "gate_plan"]


def gate_plan(gate: enn.Gate) -> dict:
    """Column permutation, split sizes and gate expansion of one e3nn gate.

    Returns:
        ``{"perm": LongTensor or None, "sizes": [...], "acts": [...], "expand": LongTensor
        or None}``: ``sizes`` are the widths of the scalar blocks (one per activation), then
        the gates and the gated columns (both absent when nothing is gated).
    """
    cut = gate.sc.cut
    starts = [s.start for s in cut.irreps_in.slices()]
    dims = [mul_ir.dim for mul_ir in cut.irreps_in]
    scalars_idx, gates_idx, gated_idx = cut.instructions

    def columns(blocks) -> list[int]:
        return [c for b in blocks for c in range(starts[b], starts[b] + dims[b])]

    sizes, acts, perm = [], [], []
    # Extract's output blocks are the simplified irreps; Activation walks those blocks.
    scalar_cols = columns(scalars_idx)
    for (mul, _), act in zip(gate.act_scalars.irreps_in, gate.act_scalars.acts):
        if act is None:
            raise ValueError("fused gates activate every scalar block")
        sizes.append(mul)
        acts.append(act)
    perm += scalar_cols
    expand = None
    if gate.irreps_gates.dim:
        gate_cols, gated_cols = columns(gates_idx), columns(gated_idx)
        gate_acts = list(gate.act_gates.acts)
        if len(gate_acts) != 1:
            raise ValueError("fused gates take one gate block with one activation")
        acts.append(gate_acts[0])
        sizes += [len(gate_cols), len(gated_cols)]
        perm += gate_cols + gated_cols
        # gated copy j (in irreps_gated's order) spans 2l+1 columns, all scaled by gate j
        copies = [ir.dim for mul, ir in gate.irreps_gated for _ in range(mul)]
        expand = torch.tensor([j for j, dim in enumerate(copies) for _ in range(dim)],
                              dtype=torch.long)
    perm_t = None if perm == list(range(cut.irreps_in.dim)) else torch.tensor(perm)
    return {"perm": perm_t, "sizes": sizes, "acts": acts, "expand": expand,
            "scalar_blocks": len(gate.act_scalars.acts)}


class FusedGate(enn.Gate):
    """An ``e3nn.nn.Gate`` evaluated as in the module docstring."""

    def forward(self, features: torch.Tensor) -> torch.Tensor:
        plan = self._fused_gate
        lead = features.shape[:-1]
        x = features.reshape(-1, features.shape[-1])
        if plan["perm"] is not None:
            x = x.index_select(1, _on(plan, "perm", x.device))
        parts = x.split(plan["sizes"], 1) if len(plan["sizes"]) > 1 else (x,)
        k = plan["scalar_blocks"]
        acts = plan["acts"]
        out = [acts[i](parts[i]) for i in range(k)]
        if plan["expand"] is not None:
            gates = acts[k](parts[k]).index_select(1, _on(plan, "expand", x.device))
            out.append(parts[k + 1] * gates)
        y = out[0] if len(out) == 1 else torch.cat(out, 1)
        return y.reshape(*lead, y.shape[-1])


def _on(plan: dict, key: str, device: torch.device) -> torch.Tensor:
    t = plan[key]
    if t.device != device:
        t = plan[key] = t.to(device)
    return t


def fuse_gate(gate: enn.Gate) -> bool:
    """Switch ``gate`` to :class:`FusedGate` in place; False where the plan does not apply
    (several gate activations; the gate then keeps e3nn's code)."""
    if type(gate) is not enn.Gate:
        return False
    try:
        plan = gate_plan(gate)
    except ValueError:
        return False
    if not plan["sizes"] or sum(plan["sizes"]) == 0:
        return False
    gate._fused_gate = plan
    gate.__class__ = FusedGate
    return True
