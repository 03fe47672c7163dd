"""Linear advection-diffusion-reaction: bounds against exact solutions of the literature."""

from __future__ import annotations

import pytest
import sympy as sp

from tests.families.manufactured import t, x
from tests.families.support import assert_bound_holds, run_case

K = 0.4
PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)  # moves boundary values


def heat_operator(k: float):
    return lambda v: sp.diff(v, t) - k * sp.diff(v, x, 2)


@pytest.mark.parametrize("eps", [1e-1, 1e-2, 1e-4])
def test_heat_inhomogeneous_dirichlet_separable(eps: float) -> None:
    """Separable heat solution with an affine steady part (Fourier's method; Strauss, PDE: An
    Introduction, 2nd ed. 2008, sec. 4.1): u = 1 - 0.8x + 0.6 e^{-k pi^2 t} sin(pi x)."""
    u = (
        1
        - sp.Rational(4, 5) * x
        + sp.Rational(3, 5) * sp.exp(-K * sp.pi**2 * t) * sp.sin(sp.pi * x)
    )
    problem = {
        "equation": "u_t = k*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 0.5],
        "parameters": {"k": K},
        "boundary": "dirichlet",
        "initial_value": "1 - 0.8*x + 0.6*sin(pi*x)",
        "boundary_value": "1 - 0.8*x",
    }
    um = u + eps * PHI
    # |u_x| <= 0.8 + 0.6 pi e^{-k pi^2 t} (time-varying); |phi_x| <= 5 on the box (x <= 1)
    regularity = {
        "sup_abs_u_x": "0.8 + 0.6*pi*exp(-k*pi^2*t)",
        "sup_abs_model_u_x": f"0.8 + 0.6*pi*exp(-k*pi^2*t) + {5 * eps}",
    }
    doc, err = run_case(
        problem,
        regularity,
        um,
        u,
        heat_operator(K),
        1 - sp.Rational(4, 5) * x + sp.Rational(3, 5) * sp.sin(sp.pi * x),
        1 - sp.Rational(4, 5) * x,
    )
    assert_bound_holds(doc, err)
    assert doc["family"] == "linear-advection-diffusion-reaction"


@pytest.mark.parametrize("eps", [1e-1, 1e-3])
def test_advection_diffusion_reaction_fourier_mode(eps: float) -> None:
    """u = e^{-(k m^2 + c) t} sin(m (x - a t)) solves u_t + a u_x = k u_xx - c u (a damped
    travelling Fourier mode; e.g. Strauss 2008, sec. 2.4 and 4.1, substitution x -> x - a t)."""
    a, k, c, m = 1.5, 0.1, 0.3, 2.0
    u = sp.exp(-(k * m**2 + c) * t) * sp.sin(m * (x - a * t))
    problem = {
        "equation": "u_t + a*u_x = k*u_xx - c*u",
        "space": {"x": [0.0, 3.0]},
        "time": [0.0, 1.0],
        "parameters": {"a": a, "k": k, "c": c},
    }
    um = u + eps * PHI
    regularity = {
        "sup_abs_u_x": m,
        "sup_abs_model_u_x": m + 25 * eps,
    }  # |phi_x| <= 6 + 19 on [0, 3]
    op = lambda v: sp.diff(v, t) + a * sp.diff(v, x) - k * sp.diff(v, x, 2) + c * v  # noqa: E731
    doc, err = run_case(problem, regularity, um, u, op, u.subs(t, 0), u)
    assert_bound_holds(doc, err)
