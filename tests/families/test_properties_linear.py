"""Property test: the linear ADR bound holds for random admissible problems and surrogates.

Problem: ``u_t + a u_x = k u_xx - c u`` on ``(0, L) x (0, T)`` with the exact travelling,
damped Fourier mode ``u = exp(-(k m^2 + c) t) sin(m (x - a t))`` (substitution ``x -> x - a t``
in a separable heat solution; Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 2.4 and 4.1)
and its own Dirichlet data. Surrogate ``u + eps phi`` with ``phi`` a random combination of
``A_j sin(w_j x + p_j) cos(v_j t + q_j)``. Since ``L u = 0``, the residuals are ``eps L phi``
(closed form, evaluated in numpy) and the true error is ``eps ||phi||`` (fine Gauss-Legendre
rule). The bound must hold in space-time, at the final time and along the whole profile.
"""

from __future__ import annotations

import json
import math
import os
from typing import Any

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.special import roots_legendre

from api_schemas import ProblemSpec
from boundsvc.certify import build_plan, certify, derive
from boundsvc.families import problem_sha256
from tests.families.manufactured import TrueError
from tests.families.test_semilinear import check

_Z, _WZ = roots_legendre(120)

modes = st.tuples(
    st.floats(-1.0, 1.0),  # amplitude
    st.floats(0.0, 3.0),  # space frequency
    st.floats(0.0, 2 * math.pi),  # space phase
    st.floats(0.0, 3.0),  # time frequency
    st.floats(0.0, 2 * math.pi),  # time phase
).filter(lambda m: abs(m[0]) > 1e-3)


class Perturbation:
    """phi = sum_j A_j sin(w_j x + p_j) cos(v_j t + q_j) and its derivatives."""

    def __init__(self, terms: list[tuple[float, float, float, float, float]]) -> None:
        self.terms = terms

    def value(self, tt: np.ndarray, xx: np.ndarray, d: str = "") -> np.ndarray:
        out = np.zeros(np.broadcast(tt, xx).shape)
        for amp, w, p, v, q in self.terms:
            sx, cx = np.sin(w * xx + p), np.cos(w * xx + p)
            st_, ct = np.sin(v * tt + q), np.cos(v * tt + q)
            if d == "":
                out = out + amp * sx * ct
            elif d == "t":
                out = out - amp * v * sx * st_
            elif d == "x":
                out = out + amp * w * cx * ct
            elif d == "xx":
                out = out - amp * w * w * sx * ct
        return out

    def sup_abs_x(self) -> float:
        return sum(abs(amp) * w for amp, w, _, _, _ in self.terms)


def _norms(phi: Perturbation, eps: float, length: float, time: float) -> TrueError:
    xs, wx = 0.5 * length * (_Z + 1), 0.5 * length * _WZ
    ts, wt = 0.5 * time * (_Z + 1), 0.5 * time * _WZ

    def at(tk: float) -> float:
        return float(eps * np.sqrt(np.dot(wx, phi.value(np.full_like(xs, tk), xs) ** 2)))

    space_time = float(np.sqrt(sum(w * at(tk) ** 2 for tk, w in zip(ts, wt, strict=True))))
    return TrueError(space_time=space_time, final_time=at(time), at=at)


@settings(
    max_examples=int(os.environ.get("BOUNDSVC_PROPERTY_EXAMPLES", "60")),
    deadline=None,
    derandomize=os.environ.get("BOUNDSVC_PROPERTY_RANDOM") is None,
    suppress_health_check=[HealthCheck.too_slow],
)
@given(
    a=st.floats(-2.0, 2.0),
    k=st.floats(0.01, 1.0),
    c=st.floats(-0.5, 1.0),
    length=st.floats(0.5, 2.5),
    time=st.floats(0.2, 2.0),
    m=st.floats(0.5, 4.0),
    eps=st.sampled_from([1e-1, 1e-2, 1e-3]),
    terms=st.lists(modes, min_size=1, max_size=3),
)
def test_linear_bound_always_holds(
    a: float,
    k: float,
    c: float,
    length: float,
    time: float,
    m: float,
    eps: float,
    terms: list[tuple[float, float, float, float, float]],
) -> None:
    decay = k * m * m + c
    phi = Perturbation(terms)
    problem: dict[str, Any] = {
        "equation": "u_t + a*u_x = k*u_xx - c*u",
        "space": {"x": [0.0, length]},
        "time": [0.0, time],
        "parameters": {"a": a, "k": k, "c": c, "m": m, "d": decay, "g": eps * phi.sup_abs_x()},
        "boundary": "dirichlet",
        "initial_value": "sin(m*x)",
        "boundary_value": "exp(-d*t)*sin(m*(x - a*t))",
    }
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified,
        {"problem_id": pid, "rule": "gauss-legendre", "points": {"t": 16, "x": 32}, "panels": {}},
    )
    comps = plan.components
    pi_ = comps["interior"].points
    ti, xi = pi_[:, 0], pi_[:, 1]
    interior = eps * (
        phi.value(ti, xi, "t")
        + a * phi.value(ti, xi, "x")
        - k * phi.value(ti, xi, "xx")
        + c * phi.value(ti, xi)
    )
    x0 = comps["initial"].points[:, 0]
    pb = comps["boundary"].points
    residuals = {
        "interior": interior.tolist(),
        "initial": (eps * phi.value(np.zeros_like(x0), x0)).tolist(),
        "boundary": (eps * phi.value(pb[:, 0], pb[:, 1])).tolist(),
    }
    # sup_x |u_x| = m exp(-d t) exactly; the model adds eps sup|phi_x|
    regularity = {
        "sup_abs_u_x": "m*exp(-d*t)",
        "sup_abs_model_u_x": "m*exp(-d*t) + g",  # g = eps sup|phi_x| (a parameter)
    }
    doc = certify(classified, pid, plan, regularity, residuals, None).document
    assert doc["family"] == "linear-advection-diffusion-reaction"
    err = _norms(phi, eps, length, time)
    check(doc, err)
    path = os.environ.get("BOUNDSVC_EFFECTIVITY_LOG")
    if path:
        row = {
            "family": doc["family"],
            "case": "property: random 1-D ADR Fourier mode",
            "eps": eps,
            "eff_space_time": doc["bound"]["l2_space_time"] / err.space_time,
            "eff_final": doc["bound"]["l2_final_time"] / err.final_time,
            "params": {"a": a, "k": k, "c": c, "L": length, "T": time, "m": m},
        }
        with open(path, "a", encoding="utf-8") as fh:
            fh.write(json.dumps(row) + "\n")
