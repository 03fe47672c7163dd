"""Perturbed exact solutions: residuals of ``u_model = u_exact + eps * phi`` and true errors.

Everything here is independent of the service's parser and families: the PDE operator is written
out in sympy by each test, residuals are evaluated at the plan's points, and the true error is
integrated by an independent fine tensor Gauss-Legendre rule (scipy's nodes, 200 x 200; the
integrator is shared with the closed-form registry, ``validation.closed_form.true_error``).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import sympy as sp

from validation.closed_form import TrueError
from validation.closed_form import true_error as _true_error

t, x = sp.symbols("t x", real=True)

Operator = Callable[[sp.Expr], sp.Expr]


def _fn(expr: sp.Expr) -> Callable[[np.ndarray, np.ndarray], np.ndarray]:
    f = sp.lambdify((t, x), expr, modules="numpy")

    def call(tt: np.ndarray, xx: np.ndarray) -> np.ndarray:
        return np.broadcast_to(np.asarray(f(tt, xx), dtype=float), np.shape(tt)).copy()

    return call


def residuals_1d(plan, u_model: sp.Expr, operator: Operator, u0: sp.Expr, g: sp.Expr) -> dict:
    """Residual arrays for a 1-D time-dependent plan (components interior/initial/boundary)."""
    out: dict[str, list[float]] = {}
    comps = plan.components
    r_int = _fn(operator(u_model))
    p = comps["interior"].points
    out["interior"] = r_int(p[:, 0], p[:, 1]).tolist()
    if "initial" in comps:
        t0 = plan.time.t0
        init = _fn(u_model.subs(t, t0) - u0)
        xs = comps["initial"].points[:, 0]
        out["initial"] = init(np.full_like(xs, t0), xs).tolist()
    if "boundary" in comps:
        pb = comps["boundary"].points
        out["boundary"] = _fn(u_model - g)(pb[:, 0], pb[:, 1]).tolist()
    return out


def true_error(
    error: sp.Expr, time: tuple[float, float], space: tuple[float, float], n: int = 200
) -> TrueError:
    """L2 norms of ``error(t, x)`` by an independent 200 x 200 Gauss-Legendre rule."""
    return _true_error(_fn(error), time, {"x": space}, n_time=n, n_space=n)


def sup_abs(
    expr: sp.Expr, time: tuple[float, float], space: tuple[float, float], n: int = 400
) -> float:
    """Sampled sup of |expr| over the closed rectangle (tests use it with a safety margin)."""
    f = _fn(expr)
    ts = np.linspace(*time, n)
    xs = np.linspace(*space, n)
    tt, xx = np.meshgrid(ts, xs, indexing="ij")
    return float(np.max(np.abs(f(tt, xx))))


# ------------------------------------------------------------- several space dimensions
y, z = sp.symbols("y z", real=True)
SPACE_SYMBOLS = {"x": x, "y": y, "z": z}


def _fn_nd(expr: sp.Expr, axes: tuple[str, ...]) -> Callable[..., np.ndarray]:
    f = sp.lambdify((t, *[SPACE_SYMBOLS[a] for a in axes]), expr, modules="numpy")

    def call(*cols: np.ndarray) -> np.ndarray:
        return np.broadcast_to(np.asarray(f(*cols), dtype=float), np.shape(cols[0])).copy()

    return call


def residuals_nd(
    plan, u_model: sp.Expr, operator: Operator, u0: sp.Expr, g: sp.Expr, axes: tuple[str, ...]
) -> dict:
    """Residual arrays for a time-dependent plan in 1-3 space dimensions (components
    interior/initial/boundary; point columns are (t, *axes) and (*axes) for the initial set)."""
    out: dict[str, list[float]] = {}
    comps = plan.components
    p = comps["interior"].points
    out["interior"] = _fn_nd(operator(u_model), axes)(*p.T).tolist()
    if "initial" in comps:
        t0 = plan.time.t0
        xs = comps["initial"].points
        init = _fn_nd(u_model.subs(t, t0) - u0, axes)
        out["initial"] = init(np.full(xs.shape[0], t0), *xs.T).tolist()
    if "boundary" in comps:
        pb = comps["boundary"].points
        out["boundary"] = _fn_nd(u_model - g, axes)(*pb.T).tolist()
    return out


def true_error_nd(
    error: sp.Expr,
    time: tuple[float, float],
    space: dict[str, tuple[float, float]],
    n_time: int = 80,
    n_space: int = 60,
) -> TrueError:
    """L2 norms of ``error(t, x, ...)`` by an independent tensor Gauss-Legendre rule."""
    return _true_error(_fn_nd(error, tuple(space)), time, space, n_time=n_time, n_space=n_space)
