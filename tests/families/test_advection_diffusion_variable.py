"""Linear ADR with variable coefficients, several dimensions, and the Friedrichs decay.

Exact solutions: separable heat solutions in 2-D and 3-D (separation of variables, e.g.
Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 10.1) and manufactured solutions with a
known source (method of manufactured solutions: Roache, J. Fluids Eng. 124 (2002) 4-10), each
verified symbolically. Surrogates ``u_exact + eps * phi``; the bound is checked against the
true error everywhere it is reported. Effectivities go to ``BOUNDSVC_EFFECTIVITY_LOG``.
"""

from __future__ import annotations

import math

import pytest
import sympy as sp

from api_schemas import ProblemSpec
from boundsvc.errors import ProblemNotCovered
from boundsvc.families import classify
from tests.families.manufactured import t, x, y, z
from tests.families.test_semilinear import check, record, run

PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)
EPS = [1e-1, 1e-2, 1e-3]


def adr_operator(a: dict, k: dict, c: sp.Expr, source: sp.Expr = sp.Integer(0)):
    syms = {"x": x, "y": y, "z": z}

    def op(v: sp.Expr) -> sp.Expr:
        out = sp.diff(v, t) + c * v - source
        for axis, coeff in a.items():
            out += coeff * sp.diff(v, syms[axis])
        for axis, coeff in k.items():
            out -= coeff * sp.diff(v, syms[axis], 2)
        return out

    return op


@pytest.mark.parametrize("eps", EPS)
def test_variable_coefficients_1d_manufactured(eps: float) -> None:
    """a = 1 + sin(x)/2, k = (1 + x^2)(1 + t/2)/10 (time-dependent), c = 1/2 + cos(t)/5, with
    the source that makes u = e^{-t} sin(2x) + x exact (manufactured)."""
    a = 1 + sp.sin(x) / 2
    k = (1 + x**2) * (1 + t / 2) / 10
    c = sp.Rational(1, 2) + sp.cos(t) / 5
    u = sp.exp(-t) * sp.sin(2 * x) + x
    source = adr_operator({"x": a}, {"x": k}, c)(u)  # manufactured: L u = source exactly
    op = adr_operator({"x": a}, {"x": k}, c, source)
    assert sp.expand(op(u)) == 0
    problem = {
        "equation": (
            "u_t + (1 + sin(x)/2)*u_x = (1 + x^2)*(1 + t/2)/10*u_xx - (1/2 + cos(t)/5)*u + "
            f"({sp.sstr(source)})"
        ),
        "space": {"x": [0.0, 1.5]},
        "time": [0.0, 1.0],
        "initial_value": "sin(2*x) + x",
        "boundary_value": "exp(-t)*sin(2*x) + x",
    }
    # |u_x| <= 2 e^{-t} + 1; |phi_x| <= 2*1.5 + 2*(2.25 + 0.5) = 8.5 on [0, 1.5]
    regularity = {
        "sup_abs_u_x": "2*exp(-t) + 1",
        "sup_abs_model_u_x": f"2*exp(-t) + 1 + {8.5 * eps}",
    }
    doc, err = run(problem, regularity, u + eps * PHI, u, op)
    assert doc["family"] == "linear-advection-diffusion-reaction"
    sup_q = next(c for c in doc["constants"] if c["symbol"] == "sup_x q")
    assert "time piece" in " ".join(sup_q["derivation"])
    check(doc, err)
    record("1-D variable a(x), k(x,t), c(t), manufactured", eps, doc, err)


@pytest.mark.parametrize("eps", EPS)
def test_heat_2d_separable(eps: float) -> None:
    """u = e^{-2 k pi^2 t} sin(pi x) sin(pi y) solves u_t = k (u_xx + u_yy) on the unit square
    with zero Dirichlet data (separation of variables)."""
    kk = 0.1
    u = sp.exp(-2 * kk * sp.pi**2 * t) * sp.sin(sp.pi * x) * sp.sin(sp.pi * y)
    op = adr_operator({}, {"x": kk, "y": kk}, sp.Integer(0))
    assert sp.simplify(op(u)) == 0
    problem = {
        "equation": "u_t = k*(u_xx + u_yy)",
        "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "parameters": {"k": kk},
        "initial_value": "sin(pi*x)*sin(pi*y)",
        "boundary_value": "0",
    }
    phi = PHI * (1 + y)
    decay = f"pi*exp(-2*{kk}*pi^2*t)"
    regularity = {
        "sup_abs_u_x": decay,
        "sup_abs_u_y": decay,
        "sup_abs_model_u_x": f"{decay} + {10 * eps}",
        "sup_abs_model_u_y": f"{decay} + {1.5 * eps}",
    }
    doc, err = run(problem, regularity, u + eps * phi, u, op, points={"t": 12, "x": 14, "y": 14})
    check(doc, err)
    record("2-D heat, separable, k = 0.1", eps, doc, err)


@pytest.mark.parametrize("eps", EPS)
def test_rotating_advection_2d_variable_diffusion(eps: float) -> None:
    """a = (y, -x) (div a = 0), k_x = (1 + x)/20, k_y = (1 + y^2)/20, c = x y; manufactured
    u = e^{-t/2} cos(x) (1 + y) + 1/4 on [0,1] x [0,1]."""
    a = {"x": y, "y": -x}
    k = {"x": (1 + x) / 20, "y": (1 + y**2) / 20}
    c = x * y
    u = sp.exp(-t / 2) * sp.cos(x) * (1 + y) + sp.Rational(1, 4)
    source = adr_operator(a, k, c)(u)
    op = adr_operator(a, k, c, source)
    assert sp.expand(op(u)) == 0
    problem = {
        "equation": (
            "u_t + y*u_x - x*u_y = (1 + x)/20*u_xx + (1 + y^2)/20*u_yy - x*y*u + "
            f"({sp.sstr(source)})"
        ),
        "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "initial_value": "cos(x)*(1 + y) + 1/4",
        "boundary_value": "exp(-t/2)*cos(x)*(1 + y) + 1/4",
    }
    phi = PHI * (1 + y)
    # |u_x| <= 2 sin(1) e^{-t/2} <= 1.7 e^{-t/2}, |u_y| <= e^{-t/2}
    regularity = {
        "sup_abs_u_x": "1.7*exp(-t/2)",
        "sup_abs_u_y": "exp(-t/2)",
        "sup_abs_model_u_x": f"1.7*exp(-t/2) + {10 * eps}",
        "sup_abs_model_u_y": f"exp(-t/2) + {1.5 * eps}",
    }
    doc, err = run(problem, regularity, u + eps * phi, u, op, points={"t": 12, "x": 14, "y": 14})
    check(doc, err)
    record("2-D rotating a = (y, -x), variable k, c = xy, manufactured", eps, doc, err)


def test_heat_3d_separable() -> None:
    """u = e^{-3 k pi^2 t} sin(pi x) sin(pi y) sin(pi z) on the unit cube (separation of
    variables), one perturbation size (3-D plans are large)."""
    kk, eps = sp.Rational(1, 20), 1e-2
    u = sp.exp(-3 * kk * sp.pi**2 * t) * sp.sin(sp.pi * x) * sp.sin(sp.pi * y) * sp.sin(sp.pi * z)
    op = adr_operator({}, {"x": kk, "y": kk, "z": kk}, sp.Integer(0))
    assert sp.simplify(op(u)) == 0
    problem = {
        "equation": "u_t = k*(u_xx + u_yy + u_zz)",
        "space": {"x": [0.0, 1.0], "y": [0.0, 1.0], "z": [0.0, 1.0]},
        "time": [0.0, 0.5],
        "parameters": {"k": float(kk)},
        "initial_value": "sin(pi*x)*sin(pi*y)*sin(pi*z)",
        "boundary_value": "0",
    }
    phi = PHI * (1 + y) * (1 + z)
    decay = f"pi*exp(-3*{float(kk)}*pi^2*t)"
    regularity = {
        "sup_abs_u_x": decay,
        "sup_abs_u_y": decay,
        "sup_abs_u_z": decay,
        "sup_abs_model_u_x": f"{decay} + {20 * eps}",
        "sup_abs_model_u_y": f"{decay} + {3 * eps}",
        "sup_abs_model_u_z": f"{decay} + {3 * eps}",
    }
    doc, err = run(
        problem, regularity, u + eps * phi, u, op, points={"t": 8, "x": 8, "y": 8, "z": 8}
    )
    check(doc, err)
    record("3-D heat, separable, k = 0.05", eps, doc, err)


@pytest.mark.parametrize("eps", EPS)
def test_hard_boundary_condition_friedrichs(eps: float) -> None:
    """Heat equation with a surrogate that satisfies the Dirichlet condition exactly (boundary
    residual 0.0 at every sample): the rate gets the Friedrichs decay -2 k (pi/L)^2."""
    kk, length = 0.2, 2.0
    u = sp.exp(-kk * (sp.pi / length) ** 2 * t) * sp.sin(sp.pi * x / length)
    op = adr_operator({}, {"x": kk}, sp.Integer(0))
    problem = {
        "equation": "u_t = k*u_xx",
        "space": {"x": [0.0, length]},
        "time": [0.0, 1.0],
        "parameters": {"k": kk},
        "initial_value": "sin(pi*x/2)",
        "boundary_value": "0",
    }
    phi = sp.sin(3 * t + 1) * x * (length - x) * sp.cos(x)  # exactly 0.0 at x = 0 and x = 2
    regularity = {"sup_abs_u_x": math.pi / length, "sup_abs_model_u_x": math.pi / length + 3 * eps}
    doc, err = run(problem, regularity, u + eps * phi, u, op)
    assert any("Friedrichs" in w for w in doc["warnings"])
    assert doc["constants"][0]["value"] == pytest.approx(-2 * kk * (math.pi / length) ** 2)
    assert doc["constants"][0]["rigor"] == "assumed"
    check(doc, err)
    record("1-D heat, hard BC (Friedrichs), k = 0.2, L = 2", eps, doc, err)


@pytest.mark.parametrize("eps", [1e-1, 1e-2, 1e-3])
def test_variable_diffusion_with_friedrichs_young_split(eps: float) -> None:
    """k = 0.1 + 0.05 x (d k/dx != 0) with a surrogate exact on the boundary: the non-divergence
    term is bounded by Young against part of the dissipation, the rest gives Friedrichs decay.
    Manufactured u = e^{-t} sin(pi x) on [0, 1]."""
    k = sp.Rational(1, 10) + x / 20
    u = sp.exp(-t) * sp.sin(sp.pi * x)
    source = adr_operator({}, {"x": k}, sp.Integer(0))(u)
    op = adr_operator({}, {"x": k}, sp.Integer(0), source)
    problem = {
        "equation": f"u_t = (0.1 + 0.05*x)*u_xx + ({sp.sstr(source)})",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "initial_value": "sin(pi*x)",
        "boundary_value": "0",
    }
    phi = sp.sin(3 * t + 1) * x * (1 - x) * sp.exp(x)
    regularity = {"sup_abs_u_x": "pi*exp(-t)", "sup_abs_model_u_x": f"pi*exp(-t) + {3 * eps}"}
    doc, err = run(problem, regularity, u + eps * phi, u, op)
    assert any("Friedrichs" in w for w in doc["warnings"])
    assert doc["constants"][0]["value"] < 0
    check(doc, err)
    record("1-D k = 0.1 + 0.05x, hard BC (Young + Friedrichs), manufactured", eps, doc, err)


def _spec(equation: str, boundary: str = "dirichlet") -> ProblemSpec:
    return ProblemSpec.model_validate(
        {"equation": equation, "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0], "boundary": boundary}
    )


def test_negative_diffusion_somewhere_is_refused() -> None:
    with pytest.raises(ProblemNotCovered) as info:
        classify(_spec("u_t = (x - 0.5)*u_xx"))
    reason = info.value.reasons["linear-advection-diffusion-reaction"]
    assert "negative" in reason and "ill-posed" in reason


def test_time_dependent_negative_diffusion_is_refused() -> None:
    with pytest.raises(ProblemNotCovered) as info:
        classify(_spec("u_t = (0.5 - t)*u_xx"))
    assert "negative" in info.value.reasons["linear-advection-diffusion-reaction"]


def test_coefficient_depending_on_a_periodic_axis_is_refused() -> None:
    with pytest.raises(ProblemNotCovered) as info:
        classify(_spec("u_t + sin(2*pi*x)*u_x = 0.1*u_xx", boundary="periodic"))
    assert "periodic" in info.value.reasons["linear-advection-diffusion-reaction"]


def test_variable_coefficient_classification_and_constants() -> None:
    c = classify(_spec("u_t + (1 + x^2)*u_x = (1 + 0.5*sin(x))*u_xx - x*u + exp(t)"))
    assert c.family.id == "linear-advection-diffusion-reaction"
    desc = c.description()
    assert desc["variable_coefficients"] is True
    rate = c.constants()[0]
    assert rate.expression.startswith("lambda + sup_x")
