"""Fused tensor-product kernels: e3nn's ``uvw`` / ``uvu`` products in a handful of large ops.

e3nn generates one einsum chain per instruction (path); on a CPU with one thread and the
small multiplicities of a search trial those hundreds of tiny kernels are bound by dispatch,
not arithmetic, and tensor products are ~90 % of a training step.  The same sum, for
``x1`` blocks of order ``l1`` (multiplicity ``U``), ``x2`` blocks of order ``l2`` and outputs
of order ``l3``::

    out[z, w, k] = Σ_p α_p Σ_{u,v,i,j} W_p[u, v, w] C_p[i, j, k] x1[z, u, i] x2[z, v, j]

is evaluated in three stages that each cover *every* path at once:

1. ``T_L = x2 @ C_L`` per input order ``L``: one matmul contracts ``x2`` with the Wigner 3j
   symbols of all paths leaving order ``L`` (``[Z, 2L+1, K_L]``);
2. ``Y_L = bmm(x1_L, T_L)``: the rows of every ``x1`` block of order ``L`` against it;
3. one gather of ``Y`` for all output blocks; then per ``uvw`` block one contraction with the
   gathered, scaled weights, per ``uvu`` block a product with the gathered weights.

So a product costs about ``2 (lmax+1)`` + 1 + 2 per output block ops instead of ~4 per path,
with arithmetic close to e3nn's.  (A gather's backward zero-fills a gradient the size of its
source, so one gather a product, not one a block.)

The constants (3j symbols, indices, path weights ``α``) are made in float64 from
:func:`e3nn.o3.wigner_3j` and cast per dtype on first use, so a model
converted to float64 (the equivariance gate) computes with exact coefficients; they are not
buffers, so state dicts are e3nn's own and load into either kernel.

:func:`fuse_products` switches every supported product (and every shared, bias-free
``o3.Linear``, :class:`FusedLinear`) of a model in place (its class becomes
a subclass that overrides ``forward`` only), and every ``nn.Gate``
(:mod:`._fused_gate`); unsupported modes (``uuu``, ``uvv``, ...),
products without weights on a path and linears with biases or external weights keep e3nn's
code.
"""
from __future__ import annotations

import math
from collections import OrderedDict

import torch
from e3nn import o3

from ._build_cache import stored_plan
from ._compiled import CompiledProduct, kernel_module
from ._fusable import fusable_paths
from ._fused_gate import fuse_gate

__all__ = ["FusedProduct", "FusedLinear", "fuse_products", "fusable", "fusable_paths",
           "gathered_sum"]

def fusable(tp: torch.nn.Module) -> bool:
    """Whether :func:`fuse_products` can switch ``tp``: a plain ``o3.TensorProduct`` or
    ``FullyConnectedTensorProduct`` with :func:`fusable_paths`."""
    return type(tp) in _FUSED_CLASSES and fusable_paths(tp.instructions)


class FusedProduct:
    """The staged evaluation of one tensor product's structure (see the module docstring).

    Args:
        tp: an e3nn tensor product accepted by :func:`fusable`.
    """

    def __init__(self, tp: o3.TensorProduct) -> None:
        in1, in2, out = tp.irreps_in1, tp.irreps_in2, tp.irreps_out
        self.dim1, self.dim2, self.dim_out = in1.dim, in2.dim, out.dim
        self.shared = bool(tp.shared_weights)
        s1, s2 = in1.slices(), in2.slices()
        offsets, flat = [], 0
        for ins in tp.instructions:
            offsets.append(flat)
            flat += math.prod(ins.path_shape)
        live = [(ins, off) for ins, off in zip(tp.instructions, offsets)
                if ins.path_weight != 0 and 0 not in ins.path_shape]
        # Stage 1/2 layout per input order L: rows (block, u), kernels (in2 block, v, l3).
        groups: OrderedDict = OrderedDict()
        for ins, _ in live:
            l1 = in1[ins.i_in1].ir.l
            g = groups.setdefault(l1, {"rows": OrderedDict(), "kernels": OrderedDict(),
                                       "width": 0})
            if ins.i_in1 not in g["rows"]:
                g["rows"][ins.i_in1] = sum(in1[b].mul for b in g["rows"])
            for v in range(in2[ins.i_in2].mul):
                key = (ins.i_in2, v, out[ins.i_out].ir.l)
                if key not in g["kernels"]:
                    g["kernels"][key] = g["width"]
                    g["width"] += 2 * key[2] + 1
        self.groups = []          # per L: (C_L [D2, (2L+1) K_L], R_L, K_L)
        self.split1 = []          # x1 columns per group
        perm = []                 # x1 columns, group after group (one gather for all)
        y_offset = {}
        ytot = 0
        for l1, g in groups.items():
            d1 = 2 * l1 + 1
            cols = [s1[b].start + u * d1 + i for b in g["rows"] for u in range(in1[b].mul)
                    for i in range(d1)]
            rows, width = sum(in1[b].mul for b in g["rows"]), g["width"]
            coupling = torch.zeros(self.dim2, d1, width, dtype=torch.float64)
            for (b2, v, l3), k0 in g["kernels"].items():
                l2 = in2[b2].ir.l
                j0 = s2[b2].start + v * (2 * l2 + 1)
                coupling[j0:j0 + 2 * l2 + 1, :, k0:k0 + 2 * l3 + 1] = \
                    o3.wigner_3j(l1, l2, l3, dtype=torch.float64).permute(1, 0, 2)
            perm += cols
            self.split1.append(len(cols))
            self.groups.append((coupling.reshape(self.dim2, -1), rows, width))
            y_offset[l1] = ytot
            ytot += rows * width

        def ycol(ins, u, v, k):
            l1 = in1[ins.i_in1].ir.l
            g = groups[l1]
            k0 = g["kernels"][(ins.i_in2, v, out[ins.i_out].ir.l)]
            return y_offset[l1] + (g["rows"][ins.i_in1] + u) * g["width"] + k0 + k

        # Stage 3.  One gather of Y feeds every output block (each gather's backward fills a
        # Y-sized zero tensor, so one gather a product, not one a block).
        self.blocks = []          # per output block: ("zero", dim) | ("uvw", ...) | ("uvu", ...)
        gathers = []              # Y columns each non-zero block reads, in block order
        for i_out, (mul_o, ir_o) in enumerate(out):
            mine = [(ins, off) for ins, off in live if ins.i_out == i_out]
            modes = {ins.connection_mode for ins, _ in mine}
            if not mine:
                self.blocks.append(("zero", mul_o * ir_o.dim))
            elif modes == {"uvw"}:
                rows, widx, coef = [], [], []   # rows: (path, u, v); gathered k-major
                for ins, off in mine:
                    m1, m2 = in1[ins.i_in1].mul, in2[ins.i_in2].mul
                    for u in range(m1):
                        for v in range(m2):
                            rows.append((ins, u, v))
                            widx += [off + (u * m2 + v) * mul_o + w for w in range(mul_o)]
                            coef += [ins.path_weight] * mul_o
                gathers.append([ycol(ins, u, v, k) for k in range(ir_o.dim)
                                for ins, u, v in rows])
                self.blocks.append(("uvw", torch.tensor(widx),
                                    torch.tensor(coef, dtype=torch.float64),
                                    len(rows), mul_o, ir_o.dim))
            else:               # uvu (alone or mixed with uvw: summed entry by entry)
                entries = []    # (out column, Y column, weight index, coefficient)
                for ins, off in mine:
                    m1, m2 = in1[ins.i_in1].mul, in2[ins.i_in2].mul
                    if ins.connection_mode == "uvw":
                        for u in range(m1):
                            for v in range(m2):
                                for w in range(mul_o):
                                    entries += [(w * ir_o.dim + k, ycol(ins, u, v, k),
                                                 off + (u * m2 + v) * mul_o + w,
                                                 ins.path_weight) for k in range(ir_o.dim)]
                        continue
                    for u in range(m1):
                        for v in range(m2):
                            entries += [(u * ir_o.dim + k, ycol(ins, u, v, k), off + u * m2 + v,
                                         ins.path_weight) for k in range(ir_o.dim)]
                entries.sort()
                oc, yc, wi, cf = (list(c) for c in zip(*entries))
                direct = oc == list(range(mul_o * ir_o.dim))
                gathers.append(yc)
                self.blocks.append(("uvu", torch.tensor(oc), torch.tensor(wi),
                                    torch.tensor(cf, dtype=torch.float64),
                                    mul_o * ir_o.dim, direct))
        # None when the groups already lie in x1 in order (sorted, simplified irreps).
        self.perm = None if perm == list(range(self.dim1)) else torch.tensor(perm)
        self.split_y = [len(g) for g in gathers]
        self.gather = torch.tensor([c for g in gathers for c in g], dtype=torch.long)
        self._cast: dict = {}

    def _constants(self, dtype: torch.dtype, device: torch.device):
        key = (dtype, str(device))
        if key not in self._cast:
            def conv(t):
                return t.to(device=device, dtype=dtype if t.is_floating_point() else t.dtype)
            groups = [(conv(m), r, k) for m, r, k in self.groups]
            blocks = [tuple(conv(x) if isinstance(x, torch.Tensor) else x for x in b)
                      for b in self.blocks]
            perm = None if self.perm is None else conv(self.perm)
            self._cast[key] = (groups, blocks, perm, conv(self.gather))
        return self._cast[key]

    def rows(self, x1: torch.Tensor, x2: torch.Tensor, weight: torch.Tensor):
        """``(lead shape, x1 [Z, dim1], x2 [Z, dim2], weight [W] or [Z, W])`` after
        broadcasting the leading dimensions, as e3nn does."""
        a, b = x1.shape[:-1], x2.shape[:-1]
        if x1.dim() == 2 and a == b and (self.shared or weight.shape[:-1] == a):
            return a, x1, x2, weight  # the common case, without broadcast_shapes' 40 us
        lead = torch.broadcast_shapes(a, b, () if self.shared else weight.shape[:-1])
        x1 = x1.expand(*lead, self.dim1).reshape(-1, self.dim1)
        x2 = x2.expand(*lead, self.dim2).reshape(-1, self.dim2)
        if not self.shared:
            weight = weight.expand(*lead, weight.shape[-1]).reshape(x1.shape[0], -1)
        return lead, x1, x2, weight

    def __call__(self, x1: torch.Tensor, x2: torch.Tensor, weight: torch.Tensor) -> torch.Tensor:
        lead, x1, x2, weight = self.rows(x1, x2, weight)
        z = x1.shape[0]
        groups, blocks, perm, gather = self._constants(x1.dtype, x1.device)
        x1s = (x1 if perm is None else x1.index_select(1, perm)).split(self.split1, 1)
        ys = []
        for x, (coupling, rows, width) in zip(x1s, groups):
            t = x2 @ coupling
            if t.shape[1] == width:  # scalars (2L+1 = 1): an outer product, not a bmm
                ys.append((x[:, :, None] * t[:, None, :]).reshape(z, -1))
            else:
                ys.append(torch.bmm(x.reshape(z, rows, -1), t.reshape(z, -1, width))
                          .reshape(z, -1))
        y = ys[0] if len(ys) == 1 else torch.cat(ys, 1)
        parts = iter(y.index_select(1, gather).split(self.split_y, 1))
        pieces = []
        for block in blocks:
            kind = block[0]
            if kind == "zero":
                pieces.append(x1.new_zeros(z, block[1]))
            elif kind == "uvw":
                _, widx, coef, rows, mul, dim = block
                yo = next(parts).reshape(z, dim, rows)
                w = weight.index_select(-1, widx) * coef
                w = w.reshape(rows, mul) if self.shared else w.reshape(z, rows, mul)
                pieces.append(torch.matmul(yo, w).transpose(1, 2).reshape(z, mul * dim))
            else:
                _, oc, wi, cf, dim, direct = block
                prod = next(parts) * (weight.index_select(-1, wi) * cf)
                pieces.append(prod if direct else
                              prod.new_zeros(z, dim).index_add_(1, oc, prod))
        out = pieces[0] if len(pieces) == 1 else torch.cat(pieces, 1)
        return out.reshape(*lead, self.dim_out)


class FusedLinear(o3.Linear):
    """An ``o3.Linear`` evaluated as one matmul with a block matrix built from its weights.

    e3nn runs one einsum per instruction; here ``W[(u, i), (w, i)] = α W_ins[u, w]`` is
    gathered from the flat weight vector each call (a tiny tensor) and applied at once.
    """

    def forward(self, features, weight=None, bias=None):
        weight = self.weight if weight is None else weight
        pos, widx, coef = _linear_constants(self._fused_linear, features.dtype,
                                            features.device)
        dim_in, dim_out = self.irreps_in.dim, self.irreps_out.dim
        dense = features.new_zeros(dim_in * dim_out).index_copy(
            0, pos, weight.index_select(0, widx) * coef).reshape(dim_in, dim_out)
        return features @ dense


def _linear_constants(plan, dtype: torch.dtype, device: torch.device):
    """The plan's tensors on ``device``, the coefficients in ``dtype``: cast once per dtype
    and device and kept (a float64 -> float32 copy on every call was ~1 us each, 40 a step),
    from the float64 originals, so a model converted to float64 keeps exact values."""
    cast = plan[3]
    key = (dtype, device)
    if key not in cast:
        pos, widx, coef = plan[:3]
        cast[key] = (pos.to(device), widx.to(device), coef.to(device=device, dtype=dtype))
    return cast[key]


def _linear_plan(lin: o3.Linear):
    """(dense positions, weight indices, float64 coefficients, casts kept by
    :func:`_linear_constants`) of a shared, bias-free linear."""
    pos, widx, coef, off = [], [], [], 0
    s_in, s_out = lin.irreps_in.slices(), lin.irreps_out.slices()
    dim_out = lin.irreps_out.dim
    for ins in lin.instructions:
        mul_in, mul_out = ins.path_shape
        d = lin.irreps_in[ins.i_in].ir.dim
        for u in range(mul_in):
            for w in range(mul_out):
                for i in range(d):
                    pos.append((s_in[ins.i_in].start + u * d + i) * dim_out
                               + s_out[ins.i_out].start + w * d + i)
                    widx.append(off + u * mul_out + w)
                    coef.append(ins.path_weight)
        off += mul_in * mul_out
    if len(set(pos)) != len(pos):
        return None
    return (torch.tensor(pos, dtype=torch.long), torch.tensor(widx, dtype=torch.long),
            torch.tensor(coef, dtype=torch.float64), {})


def _linear_fusable(lin) -> bool:
    return (type(lin) is o3.Linear and lin.internal_weights and lin.shared_weights
            and lin.bias_numel == 0 and lin.weight_numel > 0 and lin.weight.dim() == 1
            and all(ins.i_in >= 0 for ins in lin.instructions))


class _FusedMixin:
    """``forward`` through the compiled kernel (:mod:`._compiled`) where it runs, else
    through the product's :class:`FusedProduct` (same weights, same math)."""

    def forward(self, x, y, weight=None):
        torch._assert(x.shape[-1] == self._in1_dim, "Incorrect last dimension for x")
        torch._assert(y.shape[-1] == self._in2_dim, "Incorrect last dimension for y")
        weight = self._get_weights(weight)
        kernel = kernel_module() if x.device.type == "cpu" else None
        if kernel is None:
            return self._fused(x, y, weight)
        plan = self._fused
        lead, x1, x2, weight = plan.rows(x, y, weight)
        out = _compiled_plan(self)(kernel, x1.contiguous(), x2.contiguous(), weight.contiguous())
        return out.reshape(*lead, plan.dim_out)


def gathered_sum(tp, x: torch.Tensor, edge_attr: torch.Tensor, weight: torch.Tensor,
                 src: torch.Tensor, dst: torch.Tensor, num_nodes: int) -> torch.Tensor | None:
    """``Σ_{e: dst[e] = i} tp(x[src[e]], edge_attr[e], weight[e])`` for every node ``i`` in one
    compiled pass, or None where that pass does not apply (a product that is not switched,
    shared weights, no compiled kernel, tensors off the CPU): the caller then gathers,
    multiplies and sums as usual.  Same sums; tests compare both to 1e-12 in float64."""
    if not isinstance(tp, _FusedMixin) or tp.shared_weights or x.device.type != "cpu":
        return None
    kernel = kernel_module()
    if kernel is None or x.dim() != 2 or edge_attr.dim() != 2 or weight.dim() != 2:
        return None
    return _compiled_plan(tp).scatter(kernel, x.contiguous(), edge_attr.contiguous(),
                            weight.contiguous(), src.contiguous(), dst.contiguous(), num_nodes)


class FusedTensorProduct(_FusedMixin, o3.TensorProduct):
    """An ``o3.TensorProduct`` evaluated by :class:`FusedProduct`."""


class FusedFullyConnectedTensorProduct(_FusedMixin, o3.FullyConnectedTensorProduct):
    """An ``o3.FullyConnectedTensorProduct`` evaluated by :class:`FusedProduct`."""


_FUSED_CLASSES = {o3.TensorProduct: FusedTensorProduct,
                  o3.FullyConnectedTensorProduct: FusedFullyConnectedTensorProduct}


def fuse_products(model: torch.nn.Module) -> int:
    """Switch every :func:`fusable` tensor product of ``model`` to the fused kernel, every
    shared, bias-free ``o3.Linear`` to :class:`FusedLinear` and every e3nn gate to
    :class:`~searcher.models._fused_gate.FusedGate`, in place.

    Parameters, buffers and state-dict keys are unchanged, so a state dict moves freely
    between a fused model and e3nn's; the plans are kept per structure.

    Returns:
        How many modules were switched.
    """
    count = 0
    for module in model.modules():
        if fusable(module):
            module._fused = _plan(module)
            module.__class__ = _FUSED_CLASSES[type(module)]
            count += 1
        elif fuse_gate(module):
            count += 1
        elif _linear_fusable(module):
            plan = _linear_plan(module)
            if plan is not None:
                module._fused_linear = plan
                module.__class__ = FusedLinear
                count += 1
    return count


def _key(tp: o3.TensorProduct) -> tuple:
    return (str(tp.irreps_in1), str(tp.irreps_in2), str(tp.irreps_out),
            tuple(tp.instructions), bool(tp.shared_weights))


def _plan(tp: o3.TensorProduct) -> FusedProduct:
    return stored_plan(_key(tp), lambda: FusedProduct(tp))


def _compiled_plan(tp: o3.TensorProduct) -> CompiledProduct:
    """The product's kernel tables: kept on the module after the first call (the store is
    keyed by structure, so every module of one structure shares them)."""
    plan = tp.__dict__.get("_compiled")
    if plan is None:
        plan = tp._compiled = stored_plan(("compiled",) + _key(tp), lambda: CompiledProduct(tp))
    return plan
