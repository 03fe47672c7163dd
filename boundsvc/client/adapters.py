"""Residuals from a model at a plan's points (numpy, float64).

A *field evaluator* is any callable ``fields(points, names) -> {name: array}`` that returns
the model's values and partial derivatives, named as in the problem text (``"u"``, ``"u_t"``,
``"u_xx"``, ``"u_tx"``), at ``points`` whose columns are the model's input axes. Two come with
the client: :class:`MLPFields` (a numpy :class:`~boundsvc.client.mlp.MLP`, exact Taylor-mode
derivatives) and :class:`boundsvc.client.torch.TorchFields` (any ``torch.nn.Module``,
autograd). A closed-form function that knows its own derivatives is a field evaluator too.

:class:`PlanEvaluator` turns a field evaluator into the residuals the service expects
(api contract, "Residuals"):

* ``interior``: ``lhs - rhs`` of the equation at each interior point, from a python callable
  of the named fields (the operator);
* ``initial``: ``u_model(t0, x) - u0(x)``;
* ``boundary``: ``u_model - g`` at the boundary points.

The residuals are exactly as good as the derivatives: both evaluators give them to rounding
(no finite differences), so the certificate's residual norms are not polluted by
differentiation error.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any, Protocol, TypeAlias

import numpy as np
import numpy.typing as npt

from api_schemas import ProblemSpec
from boundsvc.client._http import ComponentPoints, Plan
from boundsvc.client.mlp import MLP, residual_fields

__all__ = [
    "FieldEvaluator",
    "Fields",
    "MLPFields",
    "PlanEvaluator",
    "as_field_evaluator",
    "residuals_from_fields",
]

FloatArray: TypeAlias = npt.NDArray[np.float64]
#: Named values at a set of points: derivatives (``"u_xx"``) and coordinates (``"x"``).
Fields: TypeAlias = Mapping[str, FloatArray]
#: ``operator(fields) -> lhs - rhs`` at every point.
Operator: TypeAlias = Callable[[Fields], npt.ArrayLike]
#: ``u0(x)``, ``u0(x, y)``, ... or ``g(t, x)``, ...: coordinate columns as positional arguments.
DataFunction: TypeAlias = Callable[..., npt.ArrayLike]


class FieldEvaluator(Protocol):
    """Values and partial derivatives of a model: ``fields(points, names) -> {name: array}``.

    ``points`` has shape ``(n, d)`` with the model's input axes as columns; each returned
    array has shape ``(n,)``.
    """

    def __call__(self, points: FloatArray, names: Sequence[str]) -> Mapping[str, Any]: ...


class MLPFields:
    """A field evaluator for a numpy :class:`~boundsvc.client.mlp.MLP` (exact derivatives).

    Parameters
    ----------
    model : MLP
        The network; its inputs are ``axes`` in that order.
    axes : sequence of str
        Input axis names, e.g. ``("t", "x")``.
    outputs : sequence of str
        Names of the output columns (``("u",)`` for one unknown).
    batch_size : int, optional
        Rows per batch of Taylor propagation (see :meth:`MLP.fields`).
    """

    def __init__(
        self,
        model: MLP,
        axes: Sequence[str] = ("t", "x"),
        outputs: Sequence[str] = ("u",),
        batch_size: int | None = None,
    ) -> None:
        if len(axes) != model.input_dim:
            raise ValueError(
                f"axes {list(axes)} name {len(axes)} inputs; the model has {model.input_dim}"
            )
        self.model = model
        self.axes = tuple(axes)
        self.outputs = tuple(outputs)
        self.batch_size = batch_size

    def __call__(self, points: FloatArray, names: Sequence[str]) -> dict[str, FloatArray]:
        return residual_fields(
            self.model, points, self.axes, names, outputs=self.outputs, batch_size=self.batch_size
        )

    def __repr__(self) -> str:
        return f"MLPFields({self.model!r}, axes={self.axes}, outputs={self.outputs})"


def as_field_evaluator(
    model: MLP | FieldEvaluator, axes: Sequence[str], outputs: Sequence[str] = ("u",)
) -> FieldEvaluator:
    """Wrap an :class:`MLP` in :class:`MLPFields`; pass any other field evaluator through."""
    if isinstance(model, MLP):
        return MLPFields(model, axes, outputs)
    if not callable(model):
        raise TypeError(
            f"expected an MLP or a callable fields(points, names), got {type(model).__name__}"
        )
    return model


def _as_points(points: npt.ArrayLike, d: int) -> FloatArray:
    arr = np.asarray(points, dtype=np.float64)
    if arr.ndim == 1 and d == 1:
        arr = arr[:, None]
    if arr.ndim != 2 or arr.shape[1] != d:
        raise ValueError(f"points must have shape (n, {d}), got {arr.shape}")
    return arr


def _column(values: Any, name: str, n: int) -> FloatArray:
    arr = np.asarray(values, dtype=np.float64)
    if arr.ndim == 0:
        arr = np.full(n, float(arr))
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.shape[:1] != (n,):
        raise ValueError(f"{name!r} has shape {arr.shape}; expected ({n},)")
    return arr


def evaluate_fields(
    fields: FieldEvaluator, points: npt.ArrayLike, axes: Sequence[str], names: Sequence[str]
) -> dict[str, FloatArray]:
    """The requested ``names`` at ``points``, plus each coordinate under its axis name."""
    pts = _as_points(points, len(axes))
    n = pts.shape[0]
    raw = fields(pts, list(names)) if names else {}
    missing = [name for name in names if name not in raw]
    if missing:
        raise ValueError(f"the field evaluator did not return {missing}")
    out = {name: _column(raw[name], name, n) for name in names}
    for j, axis in enumerate(axes):
        out.setdefault(axis, pts[:, j])
    return out


def residuals_from_fields(
    operator: Operator,
    fields: MLP | FieldEvaluator,
    points: npt.ArrayLike,
    *,
    axes: Sequence[str],
    names: Sequence[str],
) -> FloatArray:
    """``operator(fields)`` at ``points``: the PDE residual ``lhs - rhs`` of a model.

    Parameters
    ----------
    operator : callable
        Receives a mapping with the requested ``names`` and the coordinates (``"t"``,
        ``"x"``, ...) as arrays and returns ``lhs - rhs``, e.g.
        ``lambda f: f["u_t"] + f["u"] * f["u_x"] - 0.01 * f["u_xx"]``.
    fields : MLP or field evaluator
        The model.
    points : array_like, shape (n, d)
        Columns in ``axes`` order.
    axes : sequence of str
        The model's input axes.
    names : sequence of str
        The derivatives the operator reads.

    Returns
    -------
    ndarray, shape (n,) or (n, equations)
    """
    evaluator = as_field_evaluator(fields, axes)
    values = evaluate_fields(evaluator, points, axes, names)
    n = next(iter(values.values())).shape[0]
    residual = np.asarray(operator(values), dtype=np.float64)
    if residual.ndim == 0:
        residual = np.full(n, float(residual))
    if residual.shape[0] != n:
        raise ValueError(f"the operator returned shape {residual.shape} for {n} points")
    return residual


class PlanEvaluator:
    """Interior, initial and boundary residuals of a model at a plan's points.

    Parameters
    ----------
    model : MLP or field evaluator
        The surrogate, with inputs ``axes``.
    t0 : float
        Initial time (the plan's ``initial`` points lie on ``t = t0``; the plan does not carry
        it). :meth:`for_problem` takes it from the problem.
    axes : sequence of str
        The model's input axes, time first: ``("t", "x")`` for one space dimension.
    outputs : sequence of str
        The unknowns, in the model's output order.

    Examples
    --------
    Viscous Burgers ``u_t + u u_x = nu u_xx`` with ``u0 = -sin(pi x)`` and ``g = 0``:

    >>> ev = PlanEvaluator.for_problem(net, problem)  # doctest: +SKIP
    >>> residuals = ev.residuals(
    ...     plan, lambda f: f["u_t"] + f["u"] * f["u_x"] - nu * f["u_xx"],
    ...     names=("u", "u_t", "u_x", "u_xx"),
    ...     initial_value=lambda x: -np.sin(np.pi * x), boundary_value=lambda t, x: 0 * x,
    ... )  # doctest: +SKIP
    """

    def __init__(
        self,
        model: MLP | FieldEvaluator,
        *,
        t0: float,
        axes: Sequence[str] = ("t", "x"),
        outputs: Sequence[str] = ("u",),
    ) -> None:
        if not axes or axes[0] != "t":
            raise ValueError(f"axes must start with 't' (time first), got {list(axes)}")
        self.axes = tuple(axes)
        self.space_axes = self.axes[1:]
        self.outputs = tuple(outputs)
        self.t0 = float(t0)
        self.fields = as_field_evaluator(model, self.axes, self.outputs)

    @classmethod
    def for_problem(
        cls,
        model: MLP | FieldEvaluator,
        problem: ProblemSpec | Mapping[str, Any],
        outputs: Sequence[str] | None = None,
    ) -> PlanEvaluator:
        """An evaluator whose ``t0``, axes and unknowns are those of ``problem``."""
        spec = (
            problem
            if isinstance(problem, ProblemSpec)
            else ProblemSpec.model_validate(dict(problem))
        )
        if spec.time is None:
            raise ValueError(
                "the problem is steady (no 'time'); PlanEvaluator needs a time-dependent problem"
            )
        names = outputs if outputs is not None else tuple(spec.unknowns or ("u",))
        return cls(model, t0=spec.time[0], axes=("t", *spec.space), outputs=names)

    # -- building blocks --------------------------------------------------------
    def model_points(self, component: ComponentPoints) -> FloatArray:
        """The component's points in the model's input order (``initial`` lifted to ``t0``)."""
        if component.axes == self.axes:
            return component.points
        columns = []
        for axis in self.axes:
            if axis in component.axes:
                columns.append(component.column(axis))
            elif axis == "t":
                columns.append(np.full(component.size, self.t0))
            else:
                raise ValueError(
                    f"component {component.name!r} has axes "
                    f"{list(component.axes)}; the model needs {axis!r}"
                )
        return np.stack(columns, axis=1) if columns else np.zeros((component.size, 0))

    def evaluate(self, component: ComponentPoints, names: Sequence[str]) -> dict[str, FloatArray]:
        """Named fields and coordinates at a component's points."""
        return evaluate_fields(self.fields, self.model_points(component), self.axes, names)

    def _values(self, component: ComponentPoints) -> FloatArray:
        f = self.evaluate(component, self.outputs)
        cols = [f[name] for name in self.outputs]
        return cols[0] if len(cols) == 1 else np.stack(cols, axis=1)

    def _data(
        self, function: DataFunction, component: ComponentPoints, axes: Sequence[str], what: str
    ) -> FloatArray:
        pts = self.model_points(component)
        args = [pts[:, self.axes.index(a)] for a in axes]
        raw = np.asarray(function(*args), dtype=np.float64)
        expected = (
            (component.size,) if len(self.outputs) == 1 else (component.size, len(self.outputs))
        )
        if raw.ndim == 0:
            raw = np.full(expected, float(raw))
        if raw.shape != expected:
            raise ValueError(f"{what} returned shape {raw.shape}; expected {expected}")
        return raw

    # -- the components ---------------------------------------------------------
    def interior(self, plan: Plan, operator: Operator, names: Sequence[str]) -> FloatArray:
        """``lhs - rhs`` at the interior points."""
        comp = plan["interior"]
        values = self.evaluate(comp, names)
        residual = np.asarray(operator(values), dtype=np.float64)
        if residual.shape[:1] != (comp.size,):
            raise ValueError(
                f"the operator returned shape {residual.shape} for {comp.size} interior points"
            )
        return residual

    def initial(self, plan: Plan, initial_value: DataFunction) -> FloatArray:
        """``u_model(t0, x) - u0(x)``; ``initial_value`` takes the spatial coordinates."""
        comp = plan["initial"]
        return self._values(comp) - self._data(
            initial_value, comp, self.space_axes, "initial_value"
        )

    def boundary(self, plan: Plan, boundary_value: DataFunction) -> FloatArray:
        """``u_model - g`` at the boundary points; ``boundary_value`` takes ``(t, x, ...)``."""
        comp = plan["boundary"]
        return self._values(comp) - self._data(boundary_value, comp, self.axes, "boundary_value")

    def residuals(
        self,
        plan: Plan,
        operator: Operator,
        *,
        names: Sequence[str],
        initial_value: DataFunction | None = None,
        boundary_value: DataFunction | None = None,
        others: Mapping[str, Callable[[ComponentPoints], npt.ArrayLike]] | None = None,
    ) -> dict[str, FloatArray]:
        """Every component of ``plan``, ready for :meth:`BoundsvcClient.certify`.

        Parameters
        ----------
        plan : Plan
        operator : callable
            ``operator(fields) -> lhs - rhs`` (see :func:`residuals_from_fields`).
        names : sequence of str
            The derivatives the operator reads (``("u", "u_t", "u_xx")``).
        initial_value, boundary_value : callable
            ``u0(x, ...)`` and ``g(t, x, ...)``; needed when the plan has those components.
        others : mapping, optional
            Residuals of further components (e.g. ``"periodic"``) from their points.
        """
        out: dict[str, FloatArray] = {}
        extra = dict(others or {})
        for name in plan.names:
            if name in extra:
                out[name] = np.asarray(extra.pop(name)(plan[name]), dtype=np.float64)
            elif name == "interior":
                out[name] = self.interior(plan, operator, names)
            elif name == "initial":
                if initial_value is None:
                    raise ValueError("the plan has an 'initial' component: pass initial_value")
                out[name] = self.initial(plan, initial_value)
            elif name == "boundary":
                if boundary_value is None:
                    raise ValueError("the plan has a 'boundary' component: pass boundary_value")
                out[name] = self.boundary(plan, boundary_value)
            else:
                raise ValueError(
                    f"the plan has a component {name!r} this evaluator does not "
                    f"form; pass others={{{name!r}: function_of_points}}"
                )
        if extra:
            raise ValueError(f"others names components the plan does not have: {sorted(extra)}")
        return out

    def sup_abs(self, name: str, points: npt.ArrayLike) -> float:
        """``max |name|`` over sample ``points`` (model axes order): a sampled estimate, e.g.
        for ``sup_abs_model_u_x``, not a proven sup; add a margin before asserting it."""
        values = evaluate_fields(self.fields, points, self.axes, [name])[name]
        return float(np.max(np.abs(values))) if values.size else 0.0

    def __repr__(self) -> str:
        return f"PlanEvaluator(axes={self.axes}, outputs={self.outputs}, t0={self.t0})"
