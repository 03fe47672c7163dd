"""The model-anchored rate of the conservation-law family.

Relative entropy with the model as the reference solution (Dafermos, Hyperbolic Conservation
Laws in Continuum Physics, 4th ed. 2016, sec. 5.2, the weak-strong argument with the roles of
the two solutions exchanged; the model is smooth, so it may play the Lipschitz one): the rate
uses the model's one-sided gradient bound ``sup_neg_model_u_x`` instead of the exact
solution's. Exact solution: the compressive profile ``u = x/(t - 2)`` of Burgers' equation,
``u_x = -1/(2 - t)``, steepening towards the blow-up at ``t = 2`` (Whitham, Linear and
Nonlinear Waves, 1974, sec. 2.1 [from memory]).
"""

from __future__ import annotations

import pytest
import sympy as sp

from tests.families.manufactured import t, x
from tests.families.support import assert_bound_holds, run_case

U = x / (t - 2)
PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)  # |phi_x| <= 5 on [0, 1]
PROBLEM = {
    "equation": "u_t + u*u_x = nu*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 1.5],
    "parameters": {"nu": 0.0},
    "initial_value": "-x/2",
    "boundary_value": "x/(t - 2)",
}


def burgers(v: sp.Expr) -> sp.Expr:
    return sp.diff(v, t) + v * sp.diff(v, x)


def _run(regularity: dict[str, object], eps: float):  # type: ignore[no-untyped-def]
    return run_case(PROBLEM, regularity, U + eps * PHI, U, burgers, -x / 2, U)


@pytest.mark.parametrize("eps", [1e-1, 1e-2, 1e-3])
def test_model_anchored_rate_holds_and_tightens(eps: float) -> None:
    # the exact solution's gradient is only known crudely (a constant: its value at T = 1.5),
    # the model's own one-sided gradient sharply: -d_x u_model <= 1/(2 - t) + 5 eps
    loose = {"sup_neg_u_x": 2.0}
    anchored = {**loose, "sup_neg_model_u_x": f"1/(2 - t) + {5 * eps}"}
    doc_loose, err = _run(loose, eps)
    doc_anchored, _ = _run(anchored, eps)
    assert_bound_holds(doc_loose, err)
    assert_bound_holds(doc_anchored, err)
    assert doc_anchored["bound"]["l2_space_time"] < doc_loose["bound"]["l2_space_time"]
    assert any("model-anchored" in w for w in doc_anchored["warnings"])
    rates = [c for c in doc_anchored["constants"] if c["symbol"] == "a(t)"]
    assert rates and "model-anchored" in rates[0]["name"]
    assert rates[0]["rigor"] == "assumed"


def test_the_exact_anchored_rate_wins_when_it_is_the_sharper_one() -> None:
    eps = 1e-2
    sharp = {"sup_neg_u_x": "1/(2 - t)", "sup_neg_model_u_x": 2.0 + 5 * eps}
    doc, err = _run(sharp, eps)
    assert_bound_holds(doc, err)
    rates = [c for c in doc["constants"] if c["symbol"] == "a(t)"]
    assert "model-anchored" not in rates[0]["name"]
