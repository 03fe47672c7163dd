"""PyTorch adapter: values and derivatives of any ``torch.nn.Module`` by autograd.

``TorchFields(module, axes=("t", "x"))`` is a field evaluator (see
:mod:`boundsvc.client.adapters`): it maps coordinates of shape ``(N, d)`` through the module
and differentiates with ``torch.autograd.grad`` (``create_graph=True`` where a derivative is
differentiated again), in batches so that memory stays bounded, and returns CPU float64 numpy
arrays. Inputs go to the device and dtype of the module's parameters, so a model on a GPU works
as it is.

PyTorch is optional: it is imported when a :class:`TorchFields` is made, and its absence is
reported with the command that installs it.

Notes
-----
Derivatives of ``u`` with respect to the input ``x_j`` of row ``i`` are taken as the gradient of
``sum_i u_i`` with respect to the input tensor; this equals the per-row derivative only when the
module treats rows independently (true for MLPs, convolutions over the feature axis, ...;
false for ``BatchNorm`` in training mode: put the module in evaluation mode first).
For the 1e-10 agreement with closed forms the module must be float64 (``module.double()``);
a float32 module gives float32-accurate residuals, converted to float64.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any, TypeAlias

import numpy as np
import numpy.typing as npt

from boundsvc.client.adapters import PlanEvaluator
from boundsvc.client.mlp import parse_derivative_name

if TYPE_CHECKING:
    import torch

__all__ = ["TorchFields", "require_torch", "torch_plan_evaluator"]

FloatArray: TypeAlias = npt.NDArray[np.float64]
MultiIndex: TypeAlias = tuple[int, ...]

INSTALL_HINT = (
    "boundsvc.client.torch needs PyTorch, which is not installed: "
    "pip install 'boundsvc[torch]' (pins torch==2.13.0)"
)


def require_torch() -> Any:
    """The ``torch`` module, or an ImportError that says how to install it."""
    try:
        return importlib.import_module("torch")
    except ImportError as exc:
        raise ImportError(INSTALL_HINT) from exc


def _predecessor(alpha: MultiIndex) -> tuple[MultiIndex, int]:
    """``(alpha - e_j, j)`` for the last axis ``j`` with ``alpha_j > 0``."""
    j = max(i for i, a in enumerate(alpha) if a > 0)
    return (*alpha[:j], alpha[j] - 1, *alpha[j + 1 :]), j


def _derivative_plan(wanted: Sequence[MultiIndex]) -> tuple[list[MultiIndex], set[MultiIndex]]:
    """Multi-indices whose gradient must be taken (by increasing order), and those of them
    whose gradient is itself differentiated (they need ``create_graph=True``)."""
    needed: set[MultiIndex] = set()
    for alpha in wanted:
        a = alpha
        while sum(a) > 0:
            needed.add(a)
            a, _ = _predecessor(a)
    parents = {_predecessor(a)[0] for a in needed}
    graphed = {
        p for p in parents if any((*p[:j], p[j] + 1, *p[j + 1 :]) in parents for j in range(len(p)))
    }
    return sorted(parents, key=sum), graphed


class TorchFields:
    """A field evaluator for a ``torch.nn.Module`` mapping ``(N, d)`` coordinates to outputs.

    Parameters
    ----------
    module : torch.nn.Module
        Inputs are ``axes`` in order; output of shape ``(N,)``, ``(N, 1)`` or
        ``(N, len(outputs))``.
    axes : sequence of str
        Input axis names, e.g. ``("t", "x")``.
    outputs : sequence of str
        Names of the output columns.
    batch_size : int
        Rows per forward/backward pass (memory stays bounded by one batch's graph).
    device, dtype : optional
        Where and in which precision to evaluate; default: those of the module's first
        parameter (CPU float64 for a module without parameters).
    progress : callable, optional
        ``progress(rows_done, rows_total)`` after each batch.
    """

    def __init__(
        self,
        module: torch.nn.Module,
        axes: Sequence[str] = ("t", "x"),
        outputs: Sequence[str] = ("u",),
        *,
        batch_size: int = 8192,
        device: torch.device | str | None = None,
        dtype: torch.dtype | None = None,
        progress: Callable[[int, int], None] | None = None,
    ) -> None:
        self._torch = require_torch()
        if batch_size < 1:
            raise ValueError(f"batch_size must be positive, got {batch_size}")
        self.module = module
        self.axes = tuple(axes)
        self.outputs = tuple(outputs)
        self.batch_size = int(batch_size)
        self.progress = progress
        first = next(iter(module.parameters()), None)
        self.device = (
            self._torch.device(device)
            if device is not None
            else (first.device if first is not None else self._torch.device("cpu"))
        )
        if dtype is not None:
            self.dtype = dtype
        elif first is not None and first.is_floating_point():
            self.dtype = first.dtype
        else:
            self.dtype = self._torch.float64

    def __call__(self, points: npt.ArrayLike, names: Sequence[str]) -> dict[str, FloatArray]:
        x = np.asarray(points, dtype=np.float64)
        if x.ndim != 2 or x.shape[1] != len(self.axes):
            raise ValueError(f"points must have shape (n, {len(self.axes)}), got {x.shape}")
        parsed = {name: parse_derivative_name(name, self.axes, self.outputs) for name in names}
        n = x.shape[0]
        out = {name: np.empty(n) for name in names}
        for start in range(0, n, self.batch_size):
            stop = min(n, start + self.batch_size)
            batch = self._batch(x[start:stop], parsed)
            for name in names:
                out[name][start:stop] = batch[name]
            if self.progress is not None:
                self.progress(stop, n)
        return out

    def _batch(
        self, x: FloatArray, parsed: dict[str, tuple[int, MultiIndex]]
    ) -> dict[str, FloatArray]:
        torch_ = self._torch
        # a copy: plan arrays are read-only, and torch must not alias them
        xt = torch_.tensor(x, dtype=self.dtype, device=self.device, requires_grad=True)
        with torch_.enable_grad():
            y = self.module(xt)
            if y.ndim == 1:
                y = y[:, None]
            if y.ndim != 2 or y.shape[0] != x.shape[0] or y.shape[1] != len(self.outputs):
                raise ValueError(
                    f"the module returned shape {tuple(y.shape)} for "
                    f"{x.shape[0]} points; expected ({x.shape[0]}, "
                    f"{len(self.outputs)}) for outputs {list(self.outputs)}"
                )
            result: dict[str, FloatArray] = {}
            for col in sorted({c for c, _ in parsed.values()}):
                wanted = [alpha for c, alpha in parsed.values() if c == col]
                derivs = self._derivatives(xt, y[:, col], wanted)
                for name, (c, alpha) in parsed.items():
                    if c == col:
                        result[name] = (
                            derivs[alpha]
                            .detach()
                            .to(device="cpu", dtype=torch_.float64)
                            .numpy()
                            .copy()
                        )
        return result

    def _derivatives(
        self, xt: torch.Tensor, u: torch.Tensor, wanted: Sequence[MultiIndex]
    ) -> dict[MultiIndex, torch.Tensor]:
        torch_ = self._torch
        d = len(self.axes)
        derivs: dict[MultiIndex, torch.Tensor] = {(0,) * d: u}
        parents, graphed = _derivative_plan(wanted)
        for beta in parents:
            value = derivs[beta]
            if value.requires_grad:
                # retain_graph: sibling derivatives and other outputs share the forward graph;
                # it is freed with the batch.
                (grad,) = torch_.autograd.grad(
                    value.sum(),
                    xt,
                    create_graph=beta in graphed,
                    retain_graph=True,
                    allow_unused=True,
                )
            else:
                grad = None
            if grad is None:  # the derivative vanishes identically (e.g. u_xx of a linear u)
                grad = torch_.zeros_like(xt)
            for j in range(d):
                child = (*beta[:j], beta[j] + 1, *beta[j + 1 :])
                derivs.setdefault(child, grad[:, j])
        return derivs

    def __repr__(self) -> str:
        return (
            f"TorchFields({type(self.module).__name__}, axes={self.axes}, "
            f"device={self.device}, dtype={self.dtype})"
        )


def torch_plan_evaluator(
    module: torch.nn.Module,
    problem: Any,
    *,
    batch_size: int = 8192,
    progress: Callable[[int, int], None] | None = None,
) -> PlanEvaluator:
    """A :class:`PlanEvaluator` of ``module`` for ``problem`` (axes ``("t", *space)``)."""
    base = PlanEvaluator.for_problem(lambda p, n: {}, problem)
    fields = TorchFields(module, base.axes, base.outputs, batch_size=batch_size, progress=progress)
    return PlanEvaluator(fields, t0=base.t0, axes=base.axes, outputs=base.outputs)
