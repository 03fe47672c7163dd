"""Pieces shared by the families: choosing regularity values, data checks, LaTeX helpers."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import sympy
from numpy.typing import NDArray

from boundsvc.expr import Namespace
from boundsvc.families._analysis import AnalysedProblem
from boundsvc.quadrature import Plan
from boundsvc.regularity import RegularityValue

FloatArray = NDArray[np.float64]

REL_SLACK = 1e-9
ABS_SLACK = 1e-12


def best_of(
    regularity: Mapping[str, RegularityValue], keys: Sequence[str], times: FloatArray
) -> tuple[FloatArray, list[str]] | None:
    """Pointwise minimum over the given keys that are present (each is a valid bound)."""
    used = [k for k in keys if k in regularity]
    if not used:
        return None
    values = np.min(np.stack([regularity[k].at(times) for k in used]), axis=0)
    return values, used


def gradient_keys(axis: str, model: bool, dimension: int) -> tuple[str, ...]:
    """Keys bounding ``|d_axis u|`` (or of the model), most specific first."""
    who = "model_u" if model else "u"
    keys = [f"sup_abs_{who}_{axis}"]
    keys.append(f"sup_grad_{who}")
    del dimension
    return tuple(keys)


def lambdify_coordinates(expr: sympy.Expr, problem: AnalysedProblem, axes: Sequence[str]):  # type: ignore[no-untyped-def]
    """A numpy function of the coordinate columns ``axes`` (internal symbols only)."""
    symbols = [problem.namespace.coordinate(a) for a in axes]
    # safe: the expression was built by our parser and has only our internal symbols
    return sympy.lambdify(symbols, expr, modules="numpy")


def evaluate_on(
    expr: sympy.Expr, problem: AnalysedProblem, axes: Sequence[str], points: FloatArray
) -> FloatArray:
    """Evaluate a data expression at plan points (columns in ``axes`` order)."""
    func = lambdify_coordinates(expr, problem, axes)
    with np.errstate(all="ignore"):
        out = func(*[points[:, i] for i in range(points.shape[1])])
    return np.broadcast_to(np.asarray(out, dtype=np.float64), (points.shape[0],)).copy()


def _exceeds(observed: FloatArray, bound: FloatArray) -> NDArray[np.bool_]:
    return observed > bound * (1 + REL_SLACK) + ABS_SLACK


def data_contradictions(
    problem: AnalysedProblem,
    plan: Plan,
    residuals: Mapping[str, FloatArray],
    regularity: Mapping[str, RegularityValue],
) -> list[str]:
    """Regularity values that the problem's own data (or the model's values) contradict.

    The exact solution equals the initial value at ``t0`` and the boundary value on the
    boundary, so a bound on ``sup |u|`` or ``sup |d u/d axis|`` smaller than what the data show
    there is known to be false; likewise a model bound below the model's values
    ``data + residual`` at the sampled points.
    """
    found: list[str] = []
    if plan.time is None:
        return found
    t0 = plan.time.t0
    space = list(problem.domain.space_axes)
    init = plan.components.get("initial")
    if problem.initial_values is not None and init is not None and len(problem.initial_values) == 1:
        u0 = problem.initial_values[0]
        checks: list[tuple[str, sympy.Expr, float]] = [("sup_abs_u", u0, 1.0)]
        for axis in space:
            d = sympy.diff(u0, problem.namespace.coordinate(axis))
            checks.append((f"sup_abs_u_{axis}", d, 1.0))
            if len(space) == 1:
                checks.append(("sup_neg_u_x", d, -1.0))
                checks.append(("sup_pos_u_x", d, 1.0))
        for key, expr, sign in checks:
            if key not in regularity:
                continue
            values = evaluate_on(expr, problem, space, init.points)
            observed = np.abs(values) if key.startswith("sup_abs") else np.maximum(sign * values, 0)
            bound = regularity[key].at(np.array([t0]))
            bad = np.flatnonzero(_exceeds(observed, bound))
            if bad.size:
                i = int(bad[np.argmax(observed[bad])])
                found.append(
                    f"{key} = {regularity[key].describe()} is below the initial data: "
                    f"|value| = {observed[i]:.6g} at {_where(space, init.points[i])}, t = {t0:g}"
                )
        if "sup_abs_model_u" in regularity and "initial" in residuals:
            model_values = np.abs(
                evaluate_on(u0, problem, space, init.points) + residuals["initial"]
            )
            bound = regularity["sup_abs_model_u"].at(np.array([t0]))
            bad = np.flatnonzero(_exceeds(model_values, bound))
            if bad.size:
                i = int(bad[0])
                found.append(
                    f"sup_abs_model_u = {regularity['sup_abs_model_u'].describe()} is "
                    f"below the model's own value {model_values[i]:.6g} at "
                    f"{_where(space, init.points[i])}, t = {t0:g}"
                )
    bnd = plan.components.get("boundary")
    if problem.boundary_value is not None and bnd is not None and bnd.size:
        axes = list(bnd.axes)
        g = evaluate_on(problem.boundary_value, problem, axes, bnd.points)
        times = bnd.points[:, 0]
        candidates: list[tuple[str, FloatArray]] = [("sup_abs_u", np.abs(g))]
        if "boundary" in residuals:
            candidates.append(("sup_abs_model_u", np.abs(g + residuals["boundary"])))
        for key, observed in candidates:
            if key not in regularity:
                continue
            bound = regularity[key].at(times)
            bad = np.flatnonzero(_exceeds(observed, bound))
            if bad.size:
                i = int(bad[0])
                found.append(
                    f"{key} = {regularity[key].describe()} is below the "
                    f"{'boundary data' if key == 'sup_abs_u' else 'model'} value "
                    f"{observed[i]:.6g} at {_where(axes, bnd.points[i])}"
                )
    return found


def _where(axes: Sequence[str], point: FloatArray) -> str:
    return ", ".join(f"{a} = {float(v):.6g}" for a, v in zip(axes, point, strict=True))


def reg_symbol(key: str, time_varying: bool = True) -> sympy.Expr:
    """A display-only symbol for a regularity key (our fixed key names, never user text)."""
    t = sympy.Symbol("t", real=True)
    return sympy.Function(key)(t) if time_varying else sympy.Symbol(key)


def _display_map(
    expr: sympy.Expr, ns: Namespace, latex: bool
) -> tuple[sympy.Expr, dict[sympy.Symbol, str]]:
    mapping: dict[sympy.Symbol, sympy.Symbol] = {}
    names: dict[sympy.Symbol, str] = {}
    for s in expr.free_symbols:
        info = ns.describe(s)
        if info is None:
            continue  # one of our own display symbols (lambda, G_u, ...)
        shown = sympy.Symbol(info.name, real=True)
        mapping[s] = shown
        names[shown] = ns.latex_name(s) if latex else info.name
    return expr.xreplace(mapping), names


def display_text(expr: sympy.Expr, ns: Namespace) -> str:
    """Text of an expression mixing namespace symbols and our own display symbols."""
    shown, _ = _display_map(expr, ns, latex=False)
    return sympy.sstr(shown).replace("**", "^")


def display_latex(expr: sympy.Expr, ns: Namespace) -> str:
    """LaTeX of an expression mixing namespace symbols and our own display symbols."""
    shown, names = _display_map(expr, ns, latex=True)
    return str(sympy.latex(shown, symbol_names=names))
