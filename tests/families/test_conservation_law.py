"""Scalar conservation laws: bounds against exact solutions of the literature."""

from __future__ import annotations

import pytest
import sympy as sp

from tests.families.manufactured import t, x
from tests.families.support import assert_bound_holds, run_case

PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)


def burgers(nu: float):
    return lambda v: sp.diff(v, t) + v * sp.diff(v, x) - nu * sp.diff(v, x, 2)


@pytest.mark.parametrize("eps", [1e-1, 1e-2, 1e-3])
def test_viscous_burgers_travelling_front(eps: float) -> None:
    """Viscous shock profile u = s - (d/2) tanh(d (x - s t)/(4 nu)), s = (uL+uR)/2,
    d = uL - uR (Whitham, Linear and Nonlinear Waves, 1974, sec. 4.3); sup|u_x| = d^2/(8 nu)."""
    nu, ul, ur = 0.1, 1.0, -0.5
    s, d = (ul + ur) / 2, ul - ur
    u = s - d / 2 * sp.tanh(d * (x - s * t) / (4 * nu))
    text = f"{s} - {d / 2}*tanh({d}*(x - {s}*t)/(4*nu))"
    problem = {
        "equation": "u_t + u*u_x = nu*u_xx",
        "space": {"x": [-1.0, 1.0]},
        "time": [0.0, 1.0],
        "parameters": {"nu": nu},
        "boundary": "dirichlet",
        "initial_value": f"{s} - {d / 2}*tanh({d}*x/(4*nu))",
        "boundary_value": text,
    }
    um = u + eps * PHI
    g = d**2 / (8 * nu)
    # |phi_x| <= 2 + 3 = 5 on [-1, 1]
    regularity = {"sup_abs_u_x": g, "sup_neg_u_x": g, "sup_abs_model_u_x": g + 5 * eps}
    doc, err = run_case(problem, regularity, um, u, burgers(nu), u.subs(t, 0), u)
    assert_bound_holds(doc, err)
    assert doc["family"] == "scalar-conservation-law"


@pytest.mark.parametrize("eps", [1e-1, 1e-2, 1e-3])
@pytest.mark.parametrize("nu", [0.0, 0.05])
def test_burgers_compressive_linear_profile(eps: float, nu: float) -> None:
    """u = x/(t - 2) solves Burgers for every nu (u_xx = 0); u_x = -1/(2 - t) steepens to a
    blow-up at t = 2 (e.g. Whitham 1974, sec. 2.1, the breaking of a compressive profile)."""
    u = x / (t - 2)
    problem = {
        "equation": "u_t + u*u_x = nu*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.5],
        "parameters": {"nu": nu},
        "initial_value": "-x/2",
        "boundary_value": "x/(t - 2)",
    }
    um = u + eps * PHI
    regularity: dict[str, object] = {"sup_neg_u_x": "1/(2 - t)"}
    if nu > 0:
        regularity |= {"sup_abs_u_x": "1/(2 - t)", "sup_abs_model_u_x": f"1/(2 - t) + {5 * eps}"}
    doc, err = run_case(problem, regularity, um, u, burgers(nu), -x / 2, u)
    assert_bound_holds(doc, err)


def test_rate_pole_inside_interval_is_vacuous() -> None:
    """Past the blow-up time t* = 2 the rate 1/(2 - t) has a pole: vacuous, never a crash."""
    u = x / (t - 2)
    problem = {
        "equation": "u_t + u*u_x = 0",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 2.5],
        "initial_value": "-x/2",
        "boundary_value": "x/(t - 2)",
    }
    um = u + 1e-3 * PHI
    doc, _ = run_case(problem, {"sup_neg_u_x": "1/(2 - t)"}, um, u, burgers(0.0), -x / 2, u)
    assert doc["status"] == "vacuous"
    assert doc["bound"]["l2_final_time"] is None
    assert doc["vacuous_from"] is not None and 1.9 < doc["vacuous_from"] <= 2.0 + 1e-9
    finite = [b for b in doc["time_profile"]["l2_error_bound"] if b is not None]
    assert finite and all(b > 0 for b in finite)
