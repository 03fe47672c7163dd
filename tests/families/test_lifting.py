"""The Dirichlet boundary-residual lifting of the advection-diffusion family (1-D).

With ``e = u_model - u`` and the boundary residual ``r`` at ``x = a, b``, the service subtracts
the linear interpolant ``B r`` of ``r`` between the ends (the standard lifting of Dirichlet
data, e.g. Evans, PDE, 2nd ed. 2010, sec. 5.5; Lions & Magenes 1972, ch. 1), bounds the
zero-trace remainder by the energy method and adds ``||B r||`` (triangle inequality): see
docs/theory/advection-diffusion.md, "Boundary lifting". The surrogates are closed-form heat
solutions (Fourier's method, Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 4.1) plus a
perturbation that moves the boundary values; the true error comes from an independent fine
Gauss-Legendre rule (tests/families/manufactured.py).
"""

from __future__ import annotations

import functools
import math
from typing import Any

import numpy as np
import pytest
import sympy as sp

from api_schemas import ProblemSpec
from boundsvc.certify import build_plan, certify, derive
from boundsvc.errors import PlanInvalid
from boundsvc.families import problem_sha256
from boundsvc.families.advection_diffusion import lifting_norm
from tests.families.manufactured import _fn, residuals_1d, t, true_error, x
from tests.families.support import assert_bound_holds, gauss_plan

K = 0.4
# a perturbation that moves both boundary values in time (and the interior)
PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)
U = 1 - sp.Rational(4, 5) * x + sp.Rational(3, 5) * sp.exp(-K * sp.pi**2 * t) * sp.sin(sp.pi * x)
HEAT = {
    "equation": "u_t = k*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": K},
    "boundary": "dirichlet",
    "initial_value": "1 - 0.8*x + 0.6*sin(pi*x)",
    "boundary_value": "1 - 0.8*x",
}


def heat_operator(v: sp.Expr) -> sp.Expr:
    return sp.diff(v, t) - K * sp.diff(v, x, 2)


def _regularity(eps: float) -> dict[str, Any]:
    # |u_x| <= 0.8 + 0.6 pi e^{-k pi^2 t}; |phi_x| <= 2 |x| + 2 (x^2 + 1/2) <= 5 on [0, 1]
    return {
        "sup_abs_u_x": "0.8 + 0.6*pi*exp(-k*pi^2*t)",
        "sup_abs_model_u_x": f"0.8 + 0.6*pi*exp(-k*pi^2*t) + {5 * eps}",
    }


@functools.cache
def _certify(
    eps: float, *, send_rate: bool = True, rate_scale: float = 1.0
) -> tuple[dict[str, Any], Any]:
    """Certificate (lifted if ``send_rate``) and true error; cached across the tests."""
    classified, pid, plan = gauss_plan(HEAT, {"t": 16, "x": 16}, ["boundary_t"])
    um = U + eps * PHI
    g = 1 - sp.Rational(4, 5) * x
    res = residuals_1d(plan, um, heat_operator, U.subs(t, 0), g)
    if send_rate:
        pb = plan.components["boundary_t"].points
        res["boundary_t"] = (rate_scale * _fn(sp.diff(um - g, t))(pb[:, 0], pb[:, 1])).tolist()
    doc = certify(classified, pid, plan, _regularity(eps), res, None).document
    return doc, true_error(um - U, (0.0, 0.5), (0.0, 1.0))


def _lifted(doc: dict[str, Any]) -> bool:
    return any(c["name"] == "boundary lifting" for c in doc["constants"])


@pytest.mark.parametrize("eps", [1e-1, 1e-3, 1e-5])
def test_lifted_bound_holds_for_perturbed_heat_solution(eps: float) -> None:
    """Heat solution u = 1 - 0.8x + 0.6 e^{-k pi^2 t} sin(pi x) (Strauss 2008, sec. 4.1) with
    a surrogate u + eps phi whose boundary values move: the reported bound (the smaller of the
    lifted and the flux estimate) is above the true error everywhere, at three sizes."""
    doc, err = _certify(eps)
    assert_bound_holds(doc, err)
    flux, _ = _certify(eps, send_rate=False)
    assert_bound_holds(flux, err)
    assert doc["bound"]["l2_space_time"] <= flux["bound"]["l2_space_time"]


@pytest.mark.parametrize("eps", [1e-3, 1e-5])
def test_lifting_is_tighter_for_small_boundary_residual(eps: float) -> None:
    """For a small boundary residual the lifted estimate is linear in it, the flux estimate
    only like its square root (Mishra & Molinaro, IMA J. Numer. Anal. 43 (2023), the
    (E_T^sb)^(1/2) term): the lifting is chosen and is smaller."""
    doc, _ = _certify(eps)
    flux, _ = _certify(eps, send_rate=False)
    assert _lifted(doc), doc["warnings"]
    assert not _lifted(flux)
    assert doc["bound"]["l2_space_time"] < 0.5 * flux["bound"]["l2_space_time"]
    assert doc["bound"]["l2_final_time"] < flux["bound"]["l2_final_time"]
    assert any("smallest space-time bound" in w for w in doc["warnings"])
    lifting = next(t for t in doc["terms"] if t["name"] == "boundary lifting")
    assert lifting["rigor"] == "heuristic" and lifting["value"] > 0


def test_lifted_bound_scales_linearly_with_the_perturbation() -> None:
    """Dividing the perturbation by 100 divides the lifted bound by about 100 (linear), while
    the flux estimate falls only by about 10 (square root of the boundary residual)."""
    lifted = [_certify(eps)[0]["bound"]["l2_space_time"] for eps in (1e-3, 1e-5)]
    flux = [_certify(eps, send_rate=False)[0]["bound"]["l2_space_time"] for eps in (1e-3, 1e-5)]
    assert 50 < lifted[0] / lifted[1] < 200
    assert 5 < flux[0] / flux[1] < 20


def test_inconsistent_boundary_rate_is_not_used() -> None:
    """A boundary_t that is not the time derivative of the boundary residual (here 3 times it)
    would make ||d_t B r|| wrong: the lifting is refused and the flux estimate reported."""
    doc, err = _certify(1e-4, rate_scale=3.0)
    assert not _lifted(doc)
    assert any("boundary lifting not used" in w for w in doc["warnings"])
    assert_bound_holds(doc, err)


def test_lifting_norm_closed_form() -> None:
    """||p (1 - s) + q s||^2 over an interval of length L is L/3 (p^2 + p q + q^2) (exact
    integral of a quadratic), compared with a 50-point Gauss-Legendre rule."""
    z, w = np.polynomial.legendre.leggauss(50)
    length = 2.5
    s = 0.5 * (z + 1)
    for p, q in ((1.0, 0.0), (0.3, -2.0), (-1.5, -1.5)):
        numeric = math.sqrt(float(np.dot(0.5 * length * w, (p * (1 - s) + q * s) ** 2)))
        closed = float(lifting_norm(length, np.array([p]), np.array([q]))[0])
        assert closed == pytest.approx(numeric, rel=1e-12)


def test_optional_component_is_offered_and_checked() -> None:
    """POST /v1/problems lists boundary_t for a 1-D Dirichlet problem; a plan asking for an
    optional component the theorem does not offer is refused with the field named."""
    spec = ProblemSpec.model_validate(HEAT)
    classified = derive(spec)
    assert classified.optional_components() == ["boundary_t"]
    pid = "prb_" + problem_sha256(spec)[:32]
    with pytest.raises(PlanInvalid, match="not an optional component") as info:
        build_plan(
            classified,
            {
                "problem_id": pid,
                "rule": "gauss-legendre",
                "points": {"t": 8, "x": 8},
                "panels": {},
                "optional_components": ["periodic_x"],
            },
        )
    assert info.value.field == "optional_components"
