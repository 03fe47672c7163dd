"""Running the core in-process on a manufactured case and checking bound >= true error."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import sympy as sp

from api_schemas import ProblemSpec
from boundsvc.certify import build_plan, certify, derive
from boundsvc.families import problem_sha256
from tests.families.manufactured import Operator, residuals_1d, true_error


def gauss_plan(
    problem: dict[str, Any], points: dict[str, int], optional: list[str] | None = None
) -> tuple[Any, str, Any]:
    """(classified problem, problem id, Gauss-Legendre plan) built in-process as the routes
    build them; ``optional``: the plan's optional components (e.g. ``["boundary_t"]``)."""
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    request: dict[str, Any] = {
        "problem_id": pid,
        "rule": "gauss-legendre",
        "points": points,
        "panels": {},
        "optional_components": optional or [],
    }
    return classified, pid, build_plan(classified, request)


def run_case(
    problem: dict[str, Any],
    regularity: dict[str, Any],
    u_model: sp.Expr,
    u_exact: sp.Expr,
    operator: Operator,
    u0: sp.Expr,
    g: sp.Expr,
    points: dict[str, int] | None = None,
) -> tuple[dict[str, Any], Any]:
    """Certify ``u_model`` in-process; return the certificate document and the true error."""
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan_request = {
        "problem_id": pid,
        "rule": "gauss-legendre",
        "points": points or {"t": 24, "x": 24},
        "panels": {},
    }
    plan = build_plan(classified, plan_request)
    residuals = residuals_1d(plan, u_model, operator, u0, g)
    doc = certify(classified, pid, plan, regularity, residuals, None).document
    err = true_error(u_model - u_exact, tuple(problem["time"]), tuple(problem["space"]["x"]))
    return doc, err


def assert_bound_holds(doc: dict[str, Any], err: Any) -> float:
    """The worst-bug check: bound >= true error everywhere it is reported. Returns the
    space-time effectivity (bound / true error)."""
    assert doc["status"] == "valid", doc["warnings"]
    bound = doc["bound"]
    assert bound["l2_space_time"] >= err.space_time, (bound, err.space_time)
    assert bound["l2_final_time"] >= err.final_time, (bound, err.final_time)
    profile = doc["time_profile"]
    for tk, bk in zip(profile["t"], profile["l2_error_bound"], strict=True):
        true_k = err.at(tk)
        assert bk is not None and bk >= true_k, (tk, bk, true_k)
    return bound["l2_space_time"] / err.space_time if err.space_time > 0 else math.inf


def effectivities(values: list[float]) -> str:
    return ", ".join(f"{v:.3g}" for v in values) + f" (median {np.median(values):.3g})"
