"""Fields mode: the client sends the model's values and derivatives; the service forms residuals.

A client that sends ``fields`` instead of ``residuals`` for a component cannot get the equation
wrong: the service evaluates ``lhs - rhs`` of the equation it parsed, with the model's values
(``u``, ``u_t``, ``u_x``, ``u_xx``, ...) at the plan's points, and ``u_model - u0`` /
``u_model - g`` from the problem's ``initial_value`` / ``boundary_value``.

Evaluation uses only the problem's internal symbols (``_c_t``, ``_f0_xx``, ...; see
:mod:`boundsvc.expr`), never a name the request chose; the expressions were built by our own
parser under its size limits.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Mapping, Sequence
from functools import lru_cache
from typing import Any

import numpy as np
import sympy
from numpy.typing import NDArray

from boundsvc.errors import ResidualError
from boundsvc.expr import ExpressionError
from boundsvc.families import Classified
from boundsvc.families._analysis import AnalysedProblem
from boundsvc.families._linear import field_symbols
from boundsvc.quadrature import Component, Plan
from boundsvc.residuals import decode_values

FloatArray = NDArray[np.float64]

#: Components whose residual the service can form from fields.
FIELD_COMPONENTS = ("interior", "initial", "boundary")


def _error(code: str, detail: str, field: str, index: int | None = None) -> ResidualError:
    return ResidualError(code, detail, field, index=index)


def _decode(component: str, name: str, values: object, size: int) -> FloatArray:
    field = f"fields.{component}.{name}"
    try:
        arr = decode_values(f"{component}.{name}", values, 1)
    except ResidualError as exc:
        detail = exc.detail.replace(f"{component}.{name}:", f"{field}:")
        raise _error(exc.code, detail, field, exc.index) from exc
    if arr.shape[0] != size:
        raise _error(
            "residual_length",
            f"{field}: {arr.shape[0]} values for {size} plan points",
            field,
            index=min(arr.shape[0], size),
        )
    bad = np.flatnonzero(~np.isfinite(arr))
    if bad.size:
        raise _error(
            "residual_not_finite",
            f"{field}: value at index {bad[0]} is not finite",
            field,
            index=int(bad[0]),
        )
    return np.ascontiguousarray(arr, dtype="<f8")


@lru_cache(maxsize=256)
def _compiled(expr: sympy.Expr, args: tuple[sympy.Symbol, ...]) -> Callable[..., Any]:
    # lambdify is safe here: the expression was built by our parser, and its only symbols are
    # the namespace's internal ones (_c_t, _f0_xx, ...), never a name the request chose
    if any(not s.name.startswith("_") for s in expr.free_symbols | set(args)):
        raise ValueError("only internal symbols may be compiled")
    return sympy.lambdify(args, expr, modules="numpy")


def _evaluate(
    expr: sympy.Expr, values: Mapping[sympy.Symbol, FloatArray], size: int, field: str
) -> FloatArray:
    args = tuple(sorted(values, key=str))
    with np.errstate(all="ignore"):
        out = np.asarray(_compiled(expr, args)(*(values[a] for a in args)), dtype=np.float64)
    out = np.broadcast_to(out, (size,)).copy()
    bad = np.flatnonzero(~np.isfinite(out))
    if bad.size:
        raise _error(
            "residual_not_finite",
            f"{field}: the residual formed from the fields is not finite at index {bad[0]} "
            "(a value outside the domain of a function of the equation?)",
            field,
            index=int(bad[0]),
        )
    return out


def _coordinates(
    problem: AnalysedProblem, component: Component, t0: float | None
) -> dict[sympy.Symbol, FloatArray]:
    ns = problem.namespace
    out: dict[sympy.Symbol, FloatArray] = {}
    for i, axis in enumerate(component.axes):
        out[ns.coordinate(axis)] = np.ascontiguousarray(component.points[:, i], dtype=np.float64)
    if "t" in ns.coordinates and "t" not in component.axes and t0 is not None:
        out[ns.coordinate("t")] = np.full(component.size, t0)
    return out


def _field_symbols(
    problem: AnalysedProblem, component: str, sent: Mapping[str, object]
) -> dict[str, sympy.Symbol]:
    ns = problem.namespace
    out: dict[str, sympy.Symbol] = {}
    for name in sent:
        field = f"fields.{component}.{name}"
        try:
            symbol = ns.lookup(name)
        except ExpressionError as exc:
            raise _error("fields_invalid", f"{field}: {exc.reason}", field) from exc
        info = ns.describe(symbol)
        if info is None or info.kind != "field":
            raise _error(
                "fields_invalid",
                f"{field}: {name!r} is not an unknown or a derivative of one "
                f"(the unknowns are {', '.join(ns.unknowns)})",
                field,
            )
        out[name] = symbol
    return out


def _needed(exprs: Sequence[sympy.Expr], problem: AnalysedProblem) -> set[sympy.Symbol]:
    return set().union(*(field_symbols(e, problem.namespace) for e in exprs))


def _residual_exprs(problem: AnalysedProblem, component: str) -> list[sympy.Expr]:
    ns = problem.namespace
    if component == "interior":
        return list(problem.numeric)
    unknown_symbols = [ns.field(u) for u in ns.unknowns]
    if component == "initial":
        if problem.initial_values is None:
            raise _error(
                "fields_invalid",
                "fields.initial: the problem has no initial_value, so the service cannot form "
                "u_model - u0; send residuals.initial instead, or add initial_value",
                "fields.initial",
            )
        return [u - u0 for u, u0 in zip(unknown_symbols, problem.initial_values, strict=True)]
    if problem.boundary_value is None:
        raise _error(
            "fields_invalid",
            "fields.boundary: the problem has no boundary_value, so the service cannot form "
            "u_model - g; send residuals.boundary instead, or add boundary_value",
            "fields.boundary",
        )
    if len(unknown_symbols) != 1:
        raise _error(
            "fields_invalid",
            "fields.boundary: boundary_value is one expression; with several unknowns send "
            "residuals.boundary",
            "fields.boundary",
        )
    return [unknown_symbols[0] - problem.boundary_value]


def residuals_from_fields(
    classified: Classified, plan: Plan, fields: Mapping[str, Mapping[str, object]]
) -> tuple[dict[str, FloatArray], dict[str, str]]:
    """The residual arrays of the components sent as fields, and the SHA-256 of every field.

    Raises
    ------
    ResidualError
        ``fields_invalid`` (a component the service cannot form, an unknown or superfluous
        field name, missing data), ``residual_missing`` (a field the equation needs),
        ``residual_length`` / ``residual_not_finite`` / ``residual_encoding`` /
        ``residual_dtype`` naming ``fields.<component>.<name>`` and the first bad index.
    """
    problem = classified.problem
    t0 = problem.spec.time[0] if problem.spec.time is not None else None
    arrays: dict[str, FloatArray] = {}
    digests: dict[str, str] = {}
    for component, sent in fields.items():
        where = f"fields.{component}"
        if component not in FIELD_COMPONENTS:
            raise _error(
                "fields_invalid",
                f"{where}: the service forms {', '.join(FIELD_COMPONENTS)} from fields; send "
                f"residuals.{component} for this component",
                where,
            )
        if component not in plan.components:
            raise _error(
                "residual_unknown_component",
                f"the plan has no component {component!r} (it has {', '.join(plan.components)})",
                where,
            )
        comp = plan.components[component]
        exprs = _residual_exprs(problem, component)
        symbols = _field_symbols(problem, component, sent)
        needed = _needed(exprs, problem)
        by_symbol = {s: n for n, s in symbols.items()}
        for symbol in sorted(needed, key=str):
            if symbol not in by_symbol:
                name = problem.namespace.display_name(symbol)
                raise _error(
                    "residual_missing",
                    f"{where}.{name}: the residual of {component} needs the model's {name}",
                    f"{where}.{name}",
                )
        for name, symbol in symbols.items():
            if symbol not in needed:
                raise _error(
                    "fields_invalid",
                    f"{where}.{name}: the {component} residual does not use {name} (it uses "
                    + ", ".join(sorted(problem.namespace.display_name(s) for s in needed))
                    + "); a superfluous field is refused so that a typo cannot go unnoticed",
                    f"{where}.{name}",
                )
        values = _coordinates(problem, comp, t0)
        for name, symbol in symbols.items():
            arr = _decode(component, name, sent[name], comp.size)
            digests[f"fields.{component}.{name}"] = hashlib.sha256(arr.data.cast("B")).hexdigest()
            values[symbol] = arr
        columns = [
            _evaluate(e, {s: v for s, v in values.items() if s in e.free_symbols}, comp.size, where)
            for e in exprs
        ]
        arrays[component] = columns[0] if len(columns) == 1 else np.stack(columns, axis=1)
    return arrays, digests


#: Archive names of fields-mode arrays: ``fields.<component>.<name>``.
FIELDS_PREFIX = "fields."


def field_arrays(plan: Plan, fields: Mapping[str, Mapping[str, object]]) -> dict[str, FloatArray]:
    """The decoded fields by archive name (``fields.interior.u_xx``); validated again."""
    out: dict[str, FloatArray] = {}
    for component, sent in fields.items():
        size = plan.components[component].size if component in plan.components else 0
        for name, values in sent.items():
            out[f"{FIELDS_PREFIX}{component}.{name}"] = _decode(component, name, values, size)
    return out


def split_field_arrays(arrays: Mapping[str, FloatArray]) -> dict[str, dict[str, FloatArray]]:
    """Inverse of :func:`field_arrays`: ``{component: {name: array}}``."""
    out: dict[str, dict[str, FloatArray]] = {}
    for key, arr in arrays.items():
        if key.startswith(FIELDS_PREFIX):
            component, _, name = key[len(FIELDS_PREFIX) :].partition(".")
            out.setdefault(component, {})[name] = arr
    return out


__all__ = [
    "FIELDS_PREFIX",
    "FIELD_COMPONENTS",
    "field_arrays",
    "residuals_from_fields",
    "split_field_arrays",
]
