"""Certificates with known true errors, created through the HTTP API like a client would.

The heat equation ``u_t = k*u_xx`` on [0,1] x [0,0.5], k = 0.4, has the exact solution
``u = 1 - 0.8x + 0.6 e^{-k pi^2 t} sin(pi x)`` (Fourier's method; Strauss, PDE: An
Introduction, 2nd ed. 2008, sec. 4.1); the model is ``u + eps*phi``, so its true error is
``eps*phi`` and the bound must grow with ``eps``. Residuals are evaluated by sympy at the
plan's points, independently of the service's parser (as in ``tests/families``).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
import sympy as sp

from tests.families.manufactured import t, true_error, x

K = 0.4
PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)
HEAT_EXACT = (
    1 - sp.Rational(4, 5) * x + sp.Rational(3, 5) * sp.exp(-K * sp.pi**2 * t) * sp.sin(sp.pi * x)
)
HEAT_PROBLEM: dict[str, Any] = {
    "equation": "u_t = k*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": K},
    "boundary": "dirichlet",
    "initial_value": "1 - 0.8*x + 0.6*sin(pi*x)",
    "boundary_value": "1 - 0.8*x",
}
BURGERS_BLOWUP: dict[str, Any] = {
    "equation": "u_t + u*u_x = 0",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 2.5],
    "initial_value": "-x/2",
    "boundary_value": "x/(t - 2)",
}
POINTS = {"t": 12, "x": 12}

Post = Callable[..., Any]


def _numeric(expr: sp.Expr) -> Callable[[np.ndarray, np.ndarray], np.ndarray]:
    f = sp.lambdify((t, x), expr, modules="numpy")
    return lambda tt, xx: np.broadcast_to(np.asarray(f(tt, xx), dtype=float), tt.shape).copy()


def residuals(
    plan: dict[str, Any], u_model: sp.Expr, interior: sp.Expr, u0: sp.Expr, g: sp.Expr, t0: float
) -> dict[str, list[float]]:
    """Residuals of a 1-D time-dependent plan (JSON of ``POST /v1/plans``)."""
    out: dict[str, list[float]] = {}
    for comp in plan["components"]:
        pts = np.asarray(comp["points"], dtype=float)
        axes = comp["axes"]
        if comp["name"] == "initial":
            xs = pts[:, axes.index("x")]
            out["initial"] = _numeric(u_model.subs(t, t0) - u0)(np.full_like(xs, t0), xs).tolist()
            continue
        tt, xx = pts[:, axes.index("t")], pts[:, axes.index("x")]
        expr = interior if comp["name"] == "interior" else u_model - g
        out[comp["name"]] = _numeric(expr)(tt, xx).tolist()
    return out


def _certify(
    post: Post,
    problem: dict[str, Any],
    regularity: dict[str, Any],
    u_model: sp.Expr,
    interior: sp.Expr,
    u0: sp.Expr,
    g: sp.Expr,
    model: dict[str, Any] | None,
    points: dict[str, int],
) -> dict[str, Any]:
    plan = post("/v1/plans", {"problem": problem, "points": points})
    body = {
        "problem": problem,
        "plan_id": plan["plan_id"],
        "regularity": regularity,
        "residuals": residuals(plan, u_model, interior, u0, g, problem["time"][0]),
    }
    if model is not None:
        body["model"] = model
    return dict(post("/v1/certificates", body))


def heat_certificate(
    post: Post,
    eps: float,
    *,
    model: dict[str, Any] | None = None,
    points: dict[str, int] | None = None,
) -> tuple[dict[str, Any], float]:
    """Certify ``u + eps*phi``; return the certificate and the true space-time L2 error."""
    um = HEAT_EXACT + eps * PHI
    regularity = {
        "sup_abs_u_x": "0.8 + 0.6*pi*exp(-k*pi^2*t)",
        "sup_abs_model_u_x": f"0.8 + 0.6*pi*exp(-k*pi^2*t) + {5 * eps}",
    }
    interior = sp.diff(um, t) - K * sp.diff(um, x, 2)
    doc = _certify(
        post,
        HEAT_PROBLEM,
        regularity,
        um,
        interior,
        1 - sp.Rational(4, 5) * x + sp.Rational(3, 5) * sp.sin(sp.pi * x),
        1 - sp.Rational(4, 5) * x,
        model,
        points or POINTS,
    )
    err = true_error(eps * PHI, (0.0, 0.5), (0.0, 1.0), n=80).space_time
    return doc, err


def vacuous_certificate(post: Post, *, model: dict[str, Any] | None = None) -> dict[str, Any]:
    """Inviscid Burgers ``u = x/(t - 2)`` past its blow-up at t = 2: a vacuous certificate."""
    u = x / (t - 2)
    um = u + 1e-3 * PHI
    interior = sp.diff(um, t) + um * sp.diff(um, x)
    return _certify(
        post, BURGERS_BLOWUP, {"sup_neg_u_x": "1/(2 - t)"}, um, interior, -x / 2, u, model, POINTS
    )
