"""Perturbed exact solutions: residuals of ``u_model = u_exact + eps * phi`` and true errors.

Everything here is independent of the service's parser and families: the PDE operator is written
out in sympy by each test, residuals are evaluated at the plan's points, and the true error is
integrated by an independent fine tensor Gauss-Legendre rule (scipy's nodes, 200 x 200).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import sympy as sp
from scipy.special import roots_legendre

t, x = sp.symbols("t x", real=True)

Operator = Callable[[sp.Expr], sp.Expr]


def _fn(expr: sp.Expr) -> Callable[[np.ndarray, np.ndarray], np.ndarray]:
    f = sp.lambdify((t, x), expr, modules="numpy")

    def call(tt: np.ndarray, xx: np.ndarray) -> np.ndarray:
        return np.broadcast_to(np.asarray(f(tt, xx), dtype=float), np.shape(tt)).copy()

    return call


@dataclass
class TrueError:
    """The true error of a surrogate: space-time, final time, and at given times."""

    space_time: float
    final_time: float
    at: Callable[[float], float]


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
    e = _fn(error)
    z, wz = roots_legendre(n)
    xs = 0.5 * (space[1] - space[0]) * (z + 1) + space[0]
    wx = 0.5 * (space[1] - space[0]) * wz
    ts = 0.5 * (time[1] - time[0]) * (z + 1) + time[0]
    wt = 0.5 * (time[1] - time[0]) * wz

    def at(tk: float) -> float:
        return float(np.sqrt(np.dot(wx, e(np.full_like(xs, tk), xs) ** 2)))

    tt, xx = np.meshgrid(ts, xs, indexing="ij")
    st = float(np.sqrt(np.einsum("i,j,ij->", wt, wx, e(tt, xx) ** 2)))
    return TrueError(space_time=st, final_time=at(time[1]), at=at)


def sup_abs(
    expr: sp.Expr, time: tuple[float, float], space: tuple[float, float], n: int = 400
) -> float:
    """Sampled sup of |expr| over the closed rectangle (tests use it with a safety margin)."""
    f = _fn(expr)
    ts = np.linspace(*time, n)
    xs = np.linspace(*space, n)
    tt, xx = np.meshgrid(ts, xs, indexing="ij")
    return float(np.max(np.abs(f(tt, xx))))
