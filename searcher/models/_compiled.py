"""The compiled CPU kernel for ``uvw``/``uvu`` products, and the choice between it and PyTorch.

``_kernel.cpp`` evaluates a product in one pass over its rows (forward and backward), driven
by tables of the product's structure (:class:`CompiledProduct`), so one build serves every
structure: it is compiled once per machine with ``torch.utils.cpp_extension`` into a cache
folder keyed by the source, the torch version and the CPU, and later processes only load it.

Where it cannot run (no C++ compiler, a failed build, ``SEARCHER_KERNELS=pytorch``, a tensor
off the CPU) the fused PyTorch path of :mod:`._fused` runs instead, and one line on stderr
says why, once per process.  Both compute the same sums in float64 to 1e-12
(tests/models/test_compiled.py against e3nn's generated code).

The backward is first order only (training needs no more); a double backward raises.
"""
from __future__ import annotations

import hashlib
import importlib.util
import os
import platform
import shutil
import sys
import threading
from contextlib import contextmanager
from pathlib import Path

import torch
from e3nn import o3

from searcher.errors import UserError
from searcher.options import KERNEL_ENV, kernel_choice

from ._flags import ThreadFlag

__all__ = ["CompiledProduct", "kernel_module", "kernel_status", "KERNEL_ENV", "cache_folder",
           "pytorch_kernels", "reset_kernel", "child_env"]

CACHE_ENV = "SEARCHER_KERNEL_CACHE"    # where builds are kept (default ~/.cache/searcher)
SOURCE = Path(__file__).with_name("_kernel.cpp")
COUPLING_FLOOR = 1e-14                 # 3j entries below this are rounding noise of zeros

_LOCK = threading.Lock()
_STATE: dict = {}
_OFF = ThreadFlag()


def _cpu_tag() -> str:
    """The CPU the build is tuned for (``-march=native``): model name and flags."""
    try:
        text = Path("/proc/cpuinfo").read_text()
        lines = [ln for ln in text.splitlines() if ln.startswith(("model name", "flags"))]
        return "\n".join(sorted(set(lines)))
    except OSError:
        return platform.processor() or platform.machine()


def cache_folder() -> Path:
    """The folder of this machine's build: source, torch version and CPU in its name."""
    root = Path(os.environ.get(CACHE_ENV) or Path.home() / ".cache" / "searcher" / "kernels")
    key = hashlib.sha256(SOURCE.read_bytes() + torch.__version__.encode()
                         + sys.version.encode() + _cpu_tag().encode()).hexdigest()[:16]
    return root / f"tp-{key}"


def _build():
    try:
        choice = kernel_choice()
    except UserError as err:  # the CLI refuses it first; a library caller gets the line
        raise RuntimeError(str(err)) from None
    if choice == "pytorch":
        raise RuntimeError(f"{KERNEL_ENV}=pytorch")
    cxx = os.environ.get("CXX") or "c++"
    if shutil.which(cxx) is None:
        raise RuntimeError(f"no C++ compiler ({cxx!r} is not on PATH)")
    folder = cache_folder()
    name = f"searcher_tp_{folder.name.split('-')[1]}"
    built = folder / f"{name}.so"
    # This machine built it before: load without asking ninja, unless a build is under way
    # (torch holds a "lock" file in the folder while it compiles and links).
    if built.is_file() and not (folder / "lock").exists():
        try:
            return _load(name, built)
        except ImportError:
            pass  # a broken file: build again below
    from torch.utils import cpp_extension

    folder.mkdir(parents=True, exist_ok=True)
    try:
        return cpp_extension.load(
            name=name, sources=[str(SOURCE)],
            build_directory=str(folder), extra_cflags=["-O3", "-march=native"],
            verbose=False)
    except Exception as exc:  # a failed build leaves the PyTorch path running
        lines = [ln.strip() for ln in str(exc).splitlines() if "error" in ln.lower()]
        why = lines[-1] if lines else (str(exc).strip().splitlines() or ["unknown"])[-1]
        raise RuntimeError(f"the build failed in {folder}: {why[:300]}")


def _load(name: str, path: Path):
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def kernel_module():
    """The loaded extension, or None (then :func:`kernel_status` says why)."""
    if _OFF.active:
        return None
    if "module" in _STATE:  # every product call asks: no lock once decided
        return _STATE["module"]
    with _LOCK:
        if "module" not in _STATE:
            try:
                _STATE["module"], _STATE["why"] = _build(), "compiled"
            except RuntimeError as exc:
                _STATE["module"], _STATE["why"] = None, str(exc)
                print(f"searcher: compiled tensor-product kernel off, the PyTorch path runs: "
                      f"{exc}", file=sys.stderr)
        return _STATE["module"]


def kernel_status() -> str:
    """``"compiled"``, or why the PyTorch path runs (builds or loads the kernel first)."""
    kernel_module()
    return _STATE["why"]


@contextmanager
def pytorch_kernels():
    """Within this block (this thread) products take the fused PyTorch path: the bench
    times both paths side by side in one process."""
    with _OFF.on():
        yield


def child_env(**changes: str) -> dict:
    """The environment for a child process that picks its kernel route afresh (the bench's
    and the tests' fresh processes): ``SEARCHER_KERNELS`` dropped, this package's folder on
    ``PYTHONPATH``, one torch thread, then ``changes``."""
    env = {k: v for k, v in os.environ.items() if k != KERNEL_ENV}
    env.update({"PYTHONPATH": str(Path(__file__).resolve().parents[2]),
                "OMP_NUM_THREADS": "1", **changes})
    return env


def reset_kernel() -> None:
    """Forget the loaded kernel's state so the next call decides again (tests)."""
    with _LOCK:
        _STATE.clear()


class CompiledProduct:
    """The tables ``_kernel.cpp`` reads for one product structure.

    Args:
        tp: an e3nn tensor product whose live paths are all weighted ``uvw``/``uvu``.
    """

    def __init__(self, tp: o3.TensorProduct) -> None:
        in1, in2, out = tp.irreps_in1, tp.irreps_in2, tp.irreps_out
        s1, s2, so = in1.slices(), in2.slices(), out.slices()
        rows, alpha, nz_idx, nz_val, offset = [], [], [], [], 0
        for ins in tp.instructions:
            size = 1
            for n in ins.path_shape:
                size *= n
            if ins.path_weight != 0 and size:
                (m1, ir1), (m2, ir2), (mo, iro) = in1[ins.i_in1], in2[ins.i_in2], out[ins.i_out]
                c = o3.wigner_3j(ir1.l, ir2.l, iro.l, dtype=torch.float64)
                where = (c.abs() > COUPLING_FLOOR).nonzero()
                rows.append([s1[ins.i_in1].start, m1, ir1.dim, s2[ins.i_in2].start, m2, ir2.dim,
                             so[ins.i_out].start, mo, iro.dim, offset,
                             0 if ins.connection_mode == "uvw" else 1, len(nz_val), len(where)])
                alpha.append(ins.path_weight)
                nz_idx += where.tolist()
                nz_val += c[tuple(where.T)].tolist()
            offset += size
        self.paths = torch.tensor(rows, dtype=torch.long).reshape(-1, 13)
        self.nzi = torch.tensor(nz_idx, dtype=torch.long).reshape(-1, 3)
        self._alpha = torch.tensor(alpha, dtype=torch.float64)
        self._nzc = torch.tensor(nz_val, dtype=torch.float64)
        self.dim1, self.dim2, self.dim_out = in1.dim, in2.dim, out.dim
        self.shared = bool(tp.shared_weights)
        self._cast: dict = {}

    def constants(self, dtype: torch.dtype):
        """``(alpha, nzc)`` in ``dtype`` (made from float64 once per dtype)."""
        if dtype not in self._cast:
            self._cast[dtype] = (self._alpha.to(dtype), self._nzc.to(dtype))
        return self._cast[dtype]

    def __call__(self, module, x1: torch.Tensor, x2: torch.Tensor,
                 weight: torch.Tensor) -> torch.Tensor:
        """Rows ``[Z, dim1]``, ``[Z, dim2]`` and weights ``[W]`` or ``[Z, W]`` (contiguous)."""
        return _Product.apply(x1, x2, weight, self, module)


    def scatter(self, module, x1: torch.Tensor, x2: torch.Tensor, weight: torch.Tensor,
                src: torch.Tensor, dst: torch.Tensor, n_out: int) -> torch.Tensor:
        """``out[dst[e]] += TP(x1[src[e]], x2[e], weight[e])`` in one pass (per-edge weights
        only): ``x1 [N, dim1]``, ``x2 [E, dim2]``, ``weight [E, W]`` → ``[n_out, dim_out]``."""
        if self.shared:
            raise ValueError("the gathered, summed product takes per-edge weights only")
        return _Scatter.apply(x1, x2, weight, src, dst, int(n_out), self, module)


class _Scatter(torch.autograd.Function):
    @staticmethod
    def forward(ctx, x1, x2, weight, src, dst, n_out, plan, module):
        alpha, nzc = plan.constants(x1.dtype)
        ctx.plan, ctx.module = plan, module
        ctx.save_for_backward(x1, x2, weight, src, dst)
        return module.tp_scatter_forward(x1, x2, weight, src, dst, n_out, plan.paths, alpha,
                                         plan.nzi, nzc, plan.dim_out)

    @staticmethod
    @torch.autograd.function.once_differentiable
    def backward(ctx, grad):
        x1, x2, weight, src, dst = ctx.saved_tensors
        plan = ctx.plan
        alpha, nzc = plan.constants(x1.dtype)
        need = ctx.needs_input_grad
        g1, g2, gw = ctx.module.tp_scatter_backward(
            grad.contiguous(), x1, x2, weight, src, dst, plan.paths, alpha, plan.nzi, nzc,
            need[0], need[1], need[2])
        return (g1 if need[0] else None, g2 if need[1] else None, gw if need[2] else None,
                None, None, None, None, None)


class _Product(torch.autograd.Function):
    @staticmethod
    def forward(ctx, x1, x2, weight, plan, module):
        alpha, nzc = plan.constants(x1.dtype)
        ctx.plan, ctx.module = plan, module
        ctx.save_for_backward(x1, x2, weight)
        return module.tp_forward(x1, x2, weight, plan.paths, alpha, plan.nzi, nzc,
                                 plan.dim_out, plan.shared)

    @staticmethod
    @torch.autograd.function.once_differentiable
    def backward(ctx, grad):
        x1, x2, weight = ctx.saved_tensors
        plan = ctx.plan
        alpha, nzc = plan.constants(x1.dtype)
        need = ctx.needs_input_grad
        g1, g2, gw = ctx.module.tp_backward(grad.contiguous(), x1, x2, weight, plan.paths,
                                            alpha, plan.nzi, nzc, plan.shared, need[0],
                                            need[1], need[2])
        return (g1 if need[0] else None, g2 if need[1] else None, gw if need[2] else None,
                None, None)
