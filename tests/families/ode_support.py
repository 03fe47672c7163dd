"""ODE systems: residuals of ``y_model = y_exact + eps * phi`` and true errors, independently of
the service's parser and family (the right-hand side is written out in sympy by each test, the
true error is integrated by scipy's 400-point Gauss-Legendre rule)."""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np
import sympy as sp

from api_schemas import ProblemSpec
from boundsvc.certify import build_plan, certify, derive
from boundsvc.families import problem_sha256
from validation.closed_form import TrueError, true_error

t = sp.Symbol("t", real=True)

Rhs = Callable[[Sequence[sp.Expr]], Sequence[sp.Expr]]


def _vector_fn(exprs: Sequence[sp.Expr]) -> Callable[[np.ndarray], np.ndarray]:
    funcs = [sp.lambdify(t, e, modules="numpy") for e in exprs]

    def call(tt: np.ndarray) -> np.ndarray:
        cols = [np.broadcast_to(np.asarray(f(tt), dtype=float), np.shape(tt)) for f in funcs]
        return np.stack(cols, axis=-1)

    return call


def ode_residuals(
    plan: Any, y_model: Sequence[sp.Expr], rhs: Rhs, y0: Sequence[float]
) -> dict[str, Any]:
    """Rows (point, equation): interior ``y_model' - F(t, y_model)``, initial
    ``y_model(t0) - y0``; flat lists for one unknown (the wire format)."""
    r = [sp.diff(ym, t) - f for ym, f in zip(y_model, rhs(y_model), strict=True)]
    tt = plan.components["interior"].points[:, 0]
    interior = _vector_fn(r)(tt)
    t0 = float(plan.components["initial"].points[0, 0])

    # exact arithmetic at t0 (no cancellation in y_model(t0) - y0, as a careful client would)
    def exact(e: sp.Expr) -> sp.Expr:
        return e.xreplace({f: sp.Rational(f) for f in e.atoms(sp.Float)})

    initial = np.array(
        [
            [
                float((exact(ym).subs(t, sp.Rational(t0)) - sp.Rational(v)).evalf(30))
                for ym, v in zip(y_model, y0, strict=True)
            ]
        ]
    )
    if len(y_model) == 1:
        return {"interior": interior[:, 0].tolist(), "initial": initial[:, 0].tolist()}
    return {"interior": interior.tolist(), "initial": initial.tolist()}


def ode_true_error(error: Sequence[sp.Expr], time: tuple[float, float], n: int = 400) -> TrueError:
    """Euclidean error at each time, at T, and its L2 norm in time (Gauss-Legendre, n nodes)."""
    return true_error(_vector_fn(error), time, {}, n_time=n)


def run_ode_case(
    problem: dict[str, Any],
    regularity: dict[str, Any],
    y_model: Sequence[sp.Expr],
    y_exact: Sequence[sp.Expr],
    rhs: Rhs,
    y0: Sequence[float],
    points: int = 32,
    panels: int = 1,
) -> tuple[dict[str, Any], TrueError]:
    """Certify ``y_model`` in-process; return the certificate document and the true error."""
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified,
        {
            "problem_id": pid,
            "rule": "gauss-legendre",
            "points": {"t": points},
            "panels": {"t": panels} if panels > 1 else {},
        },
    )
    residuals = ode_residuals(plan, y_model, rhs, y0)
    doc = certify(classified, pid, plan, regularity, residuals, None).document
    err = ode_true_error(
        [ym - ye for ym, ye in zip(y_model, y_exact, strict=True)], tuple(problem["time"])
    )
    return doc, err


def effectivity_row(name: str, eps: float, doc: dict[str, Any], err: TrueError) -> dict[str, Any]:
    """Bound / true error at T and over time (the numbers of the validation table)."""
    b = doc["bound"]
    return {
        "case": name,
        "eps": eps,
        "final": b["l2_final_time"] / err.final_time if err.final_time > 0 else math.inf,
        "space_time": b["l2_space_time"] / err.space_time if err.space_time > 0 else math.inf,
    }
