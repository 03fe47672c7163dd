"""The H^-1 residual estimate of the advection-diffusion family (1-D, zero-trace error).

``||F||_{-1}`` (the norm of F as a functional on ``H^1_0(a, b)``) is computed from the residual
at the Gauss-Legendre nodes (boundsvc/families/_dual.py; docs/theory/advection-diffusion.md,
steps H1-H6). Checks: the closed form for Dirichlet eigenfunctions (``-psi'' = sin(m pi x/L)``
gives ``psi = (L/(m pi))^2 sin(m pi x/L)``, so ``||sin(m pi x/L)||_{-1}^2 = (L/(m pi))^2 L/2``;
Fourier's method, W. A. Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 4.1), the definition
evaluated by scipy.integrate.quad for a non-polynomial residual, and certificates of perturbed
manufactured heat solutions (Roache 2002) against the true error.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import quad
from scipy.special import roots_legendre

from boundsvc.families._dual import dual_norm_squared_1d
from tests.families.manufactured import t, x
from tests.families.support import assert_bound_holds, run_case


def _nodes(a: float, length: float, panels: int, n: int) -> np.ndarray:
    z, _ = roots_legendre(n)
    h = length / panels
    return np.concatenate([a + h * m + h / 2 * (z + 1) for m in range(panels)])


@pytest.mark.parametrize(("panels", "n"), [(1, 24), (3, 12)])
@pytest.mark.parametrize("mode", [1, 3, 7])
def test_dirichlet_eigenfunction_closed_form(panels: int, n: int, mode: int) -> None:
    a, length = -0.5, 2.0
    xs = _nodes(a, length, panels, n)
    f = np.sin(mode * math.pi * (xs - a) / length)
    got = dual_norm_squared_1d(f[None, :], panels, length)[0]
    assert got == pytest.approx((length / (mode * math.pi)) ** 2 * length / 2, rel=1e-9)


@pytest.mark.parametrize(("panels", "n"), [(1, 24), (4, 10)])
def test_definition_by_quad(panels: int, n: int) -> None:
    """``||F||_{-1}^2 = int (Q - mean Q)^2``, ``Q = int_a^x F``, each integral by quad."""
    a, length = 0.25, 1.5

    def f(s: float) -> float:
        return math.exp(s) * math.cos(5 * s) + s**2

    def q(s: float) -> float:
        return quad(f, a, s)[0]

    mean = quad(q, a, a + length)[0] / length
    reference = quad(lambda s: (q(s) - mean) ** 2, a, a + length)[0]
    xs = _nodes(a, length, panels, n)
    got = dual_norm_squared_1d(np.array([[f(s) for s in xs]]), panels, length)[0]
    assert got == pytest.approx(reference, rel=1e-8)


K = 0.5
# manufactured solution (P. J. Roache, J. Fluids Eng. 124 (2002) 4-10): U = e^{-t} x (1 - x)
# solves u_t = k u_xx + e^{-t} (2k - x + x^2) and is exactly 0.0 on both faces in floating
# point (a sine mode is not: sin(pi) = 1.2e-16), so the boundary residual is exactly zero
HEAT = {
    "equation": "u_t = k*u_xx + exp(-t)*(2*k - x + x^2)",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": K},
    "boundary": "dirichlet",
    "initial_value": "x - x^2",
    "boundary_value": "0",
}
U = sp.exp(-t) * x * (1 - x)


def _op(u: sp.Expr) -> sp.Expr:
    return sp.diff(u, t) - K * sp.diff(u, x, 2) - sp.exp(-t) * (2 * K - x + x**2)


def _warning(doc: dict[str, object]) -> str:
    return next(w for w in doc["warnings"] if "valid estimates were assembled" in w)  # type: ignore[attr-defined]


@pytest.mark.parametrize("freq", [2, 8])
@pytest.mark.parametrize("eps", [1e-1, 1e-3])
def test_oscillating_residual_is_credited(freq: int, eps: float) -> None:
    """A zero-trace perturbation ``x (1 - x) cos(freq pi x) (1 + t)`` (exactly zero on both
    faces, so the boundary residual is 0.0): the H^-1 estimate is assembled beside the L2 one,
    the bound stays above the true error, and for the faster oscillation it is chosen and
    smaller than the L2 estimate."""
    phi = x * (1 - x) * sp.cos(freq * sp.pi * x) * (1 + t)
    model = U + eps * phi
    # |u_x| = e^{-t} |1 - 2x| <= e^{-t}; |phi_x| <= (1 + freq pi/4) (1 + t) <= 1.5 (1 + freq pi/4)
    regularity = {
        "sup_abs_u_x": "exp(-t)",
        "sup_abs_model_u_x": f"exp(-t) + {eps * 1.5 * (1 + freq * math.pi / 4)}",
    }
    doc, err = run_case(
        HEAT, regularity, model, U, _op, U.subs(t, 0), sp.Integer(0), {"t": 24, "x": 32}
    )
    assert_bound_holds(doc, err)
    note = _warning(doc)
    assert "H^-1 residual:" in note
    if freq == 8:
        assert "reported (L2 residual estimate, H^-1 residual)" in note
        l2 = float(note.split("L2 residual estimate: l2_space_time ")[1].split(",")[0])
        assert doc["bound"]["l2_space_time"] < 0.5 * l2  # type: ignore[index]
