"""sup|u| derived by the maximum principle from the problem's data (no client value needed).

Exact solution: the rarefaction ``u = sqrt(x/(t + 1))`` of ``u_t + (u^3/3)_x = 0`` (a
self-similar centred rarefaction ``f'(u) = x/(t + 1)`` with ``f'(u) = u^2``; e.g. Evans, PDE,
2nd ed. 2010, sec. 3.4.4, for the construction), on ``x in [1, 2]``: a non-convex flux whose
curvature bound needs the range of ``u``. Its values lie in ``[1/sqrt(2), sqrt(2)]``, and the
comparison principle (Kruzkov 1970) bounds them by the data: ``max(sup|u0|, sup|g|) = sqrt(2)``.
"""

from __future__ import annotations

import math
from dataclasses import replace

import pytest
import sympy as sp

from api_schemas import ProblemSpec
from boundsvc.certify import derive
from tests.families.manufactured import t, x
from tests.families.support import assert_bound_holds, run_case

U = sp.sqrt(x / (t + 1))
PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)  # |phi| <= 4.5 on [1, 2]
PROBLEM = {
    "equation": "u_t + (u^3/3)_x = 0",
    "space": {"x": [1.0, 2.0]},
    "time": [0.0, 1.0],
    "initial_value": "sqrt(x)",
    "boundary_value": "sqrt(x/(t + 1))",
}


def flux_form(v: sp.Expr) -> sp.Expr:
    return sp.diff(v, t) + v**2 * sp.diff(v, x)


def test_the_data_bound_replaces_sup_abs_u() -> None:
    classified = derive(ProblemSpec.model_validate(PROBLEM))
    keys = {k for r in classified.requirements() for k in r.any_of}
    assert "sup_abs_u" not in keys and "sup_abs_model_u" in keys
    bound = classified.data_bound  # type: ignore[attr-defined]
    assert bound is not None
    assert math.sqrt(2) <= bound <= math.sqrt(2) * 1.001  # certified, within the B&B tolerance


@pytest.mark.parametrize("eps", [1e-1, 1e-2, 1e-3])
def test_rarefaction_bound_holds_with_the_derived_range(eps: float) -> None:
    regularity = {
        "sup_neg_u_x": 0.0,  # u_x = 1/(2 sqrt(x (t + 1))) > 0: expansive
        "sup_pos_u_x": "1/(2*sqrt(t + 1))",
        "sup_abs_model_u": math.sqrt(2) + 4.5 * eps,
    }
    doc, err = run_case(PROBLEM, regularity, U + eps * PHI, U, flux_form, sp.sqrt(x), U)
    # at t0 the bound is the initial residual's quadrature norm itself: allow for rounding
    # between that rule and the fine one of the true error (1e-12 relative)
    assert_bound_holds(doc, replace(err, at=lambda tk: err.at(tk) * (1 - 1e-12)))
    derived = [c for c in doc["constants"] if c["symbol"] == "M_u"]
    assert derived and derived[0]["rigor"] == "proven"


def test_a_source_term_needs_the_client_value() -> None:
    classified = derive(
        ProblemSpec.model_validate({**PROBLEM, "equation": "u_t + (u^3/3)_x = 0.1*x"})
    )
    keys = {k for r in classified.requirements() for k in r.any_of}
    assert "sup_abs_u" in keys
