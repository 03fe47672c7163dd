"""An equation multiplied through by a constant is the same equation, and has the same bound.

The contract defines the interior residual as ``lhs - rhs`` on the model *as typed*. A family
that normalises the equation (divides by the coefficient of ``u_t``) must normalise the
residual the same way: ``3*u_t = 0.3*u_xx`` and ``u_t = 0.1*u_xx`` are one heat equation, but
the typed residual of the first is three times that of the second. Scaling the typed
equation down must never scale the bound down (that would put it below the true error).
"""

from __future__ import annotations

import pytest
import sympy as sp

from tests.families.manufactured import t, x
from tests.families.support import assert_bound_holds, run_case

# heat equation mode (Fourier's method; Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 4.1)
K = 0.1
U = sp.exp(-K * sp.pi**2 * t) * sp.sin(sp.pi * x)
PHI = sp.sin(3 * x + 1) * (1 + t)  # a smooth perturbation, not zero on the boundary


def _heat(scale: float, equation: str, eps: float) -> float:
    problem = {
        "equation": equation,
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 0.5],
        "parameters": {"k": K},
        "boundary": "dirichlet",
    }
    um = U + eps * PHI
    regularity = {"sup_abs_u_x": float(sp.pi), "sup_abs_model_u_x": float(sp.pi) + 4 * eps}

    def typed(v: sp.Expr) -> sp.Expr:  # lhs - rhs exactly as typed
        return scale * (sp.diff(v, t) - K * sp.diff(v, x, 2))

    doc, err = run_case(problem, regularity, um, U, typed, U.subs(t, 0), sp.Integer(0))
    assert_bound_holds(doc, err)
    return float(doc["bound"]["l2_space_time"])


@pytest.mark.parametrize("eps", [1e-2, 1e-4])
@pytest.mark.parametrize(
    ("scale", "equation"),
    [(0.01, "0.01*u_t = 0.01*k*u_xx"), (0.25, "0.25*u_t - 0.25*k*u_xx = 0")],
)
def test_linear_family_normalises_the_residual(scale: float, equation: str, eps: float) -> None:
    reference = _heat(1.0, "u_t = k*u_xx", eps)
    scaled = _heat(scale, equation, eps)
    assert scaled == pytest.approx(reference, rel=1e-9)


def _typed_bound(equation: str, typed, eps: float, extra: dict[str, float]) -> float:
    problem = {
        "equation": equation,
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 0.5],
        "parameters": {"k": K},
        "boundary": "dirichlet",
    }
    regularity = {"sup_abs_u_x": float(sp.pi), "sup_abs_model_u_x": float(sp.pi) + 4 * eps}
    regularity.update(extra)
    doc, err = run_case(problem, regularity, U + eps * PHI, U, typed, U.subs(t, 0), sp.Integer(0))
    assert_bound_holds(doc, err)
    return float(doc["bound"]["l2_space_time"])


@pytest.mark.parametrize("eps", [1e-2, 1e-4])
@pytest.mark.parametrize(
    ("plain", "scaled", "operator", "extra"),
    [
        # semilinear (Allen-Cahn nonlinearity u - u^3)
        (
            "u_t = k*u_xx + u - u^3",
            "4*u_t = 4*k*u_xx + 4*u - 4*u^3",
            lambda v: sp.diff(v, t) - K * sp.diff(v, x, 2) - v + v**3,
            {},
        ),
        # conservation law (viscous Burgers), typed in flux form and scaled by 1/2
        (
            "u_t + u*u_x = k*u_xx",
            "0.5*u_t + 0.5*(u^2/2)_x = 0.5*k*u_xx",
            lambda v: sp.diff(v, t) + v * sp.diff(v, x) - K * sp.diff(v, x, 2),
            {"sup_abs_u": 1.0, "sup_abs_model_u": 1.2},
        ),
    ],
)
def test_nonlinear_families_normalise_the_residual(
    plain: str, scaled: str, operator, extra: dict[str, float], eps: float
) -> None:
    factor = 4.0 if scaled.startswith("4") else 0.5
    reference = _typed_bound(plain, operator, eps, extra)
    same = _typed_bound(scaled, lambda v: factor * operator(v), eps, extra)
    assert same == pytest.approx(reference, rel=1e-9)
