"""Semilinear parabolic family: two reaction-diffusion fronts with closed forms.

* :func:`allen_cahn_front`: ``u_t = e^2 u_xx + u - u^3`` (S. M. Allen, J. W. Cahn, Acta Metall.
  27 (1979) 1085-1095). With ``u - u^3 = u (1 - u)(u + 1)`` it is the bistable Nagumo equation
  with ``a = -1``, whose travelling front (H. P. McKean, Adv. Math. 4 (1970) 209-223; P. C. Fife,
  J. B. McLeod, Arch. Ration. Mech. Anal. 65 (1977) 335-361) from 0 to 1 is

      u = (1/2) [1 + tanh((x + 3 e t/sqrt(2)) / (2 sqrt(2) e))],  sup |u_x| = 1/(4 sqrt(2) e).

* :func:`fisher_kpp`: ``u_t = u_xx + u (1 - u)``, the explicit front of M. J. Ablowitz and
  A. Zeppetella, Bull. Math. Biol. 41 (1979) 835-840:

      u = (1 + exp(x/sqrt(6) - 5 t/6))^(-2),  0 < u < 1,  sup |u_x| = 8/(27 sqrt(6)).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from validation.problems._base import FloatArray, Lift, Problem, TrainConfig, const

SEMI = "semilinear-parabolic"
EPS_AC = 0.1
C_AC = 3 * EPS_AC / math.sqrt(2)
W_AC = 2 * math.sqrt(2) * EPS_AC


def _ac_exact(t: FloatArray, x: FloatArray) -> FloatArray:
    return 0.5 * (1.0 + np.tanh((x + C_AC * t) / W_AC))


def _ac_op(f: Mapping[str, Any]) -> list[Any]:
    u = f["u"]
    return [f["u_t"] - EPS_AC**2 * f["u_xx"] - u + u * u * u]


def _ac_g(t: Any, x: Any, lib: Any) -> Any:
    xl, xr = -1.0, 1.0
    bl = 0.5 * (1.0 + lib.tanh((xl + C_AC * t) / W_AC))
    br = 0.5 * (1.0 + lib.tanh((xr + C_AC * t) / W_AC))
    return bl * ((xr - x) / (xr - xl)) + br * ((x - xl) / (xr - xl))


def allen_cahn_front(*, hard: bool = False) -> Problem:
    """Allen-Cahn travelling front (Nagumo front with a = -1)."""
    g = 1.0 / (4 * math.sqrt(2) * EPS_AC)
    return Problem(
        key="allen-cahn-front-hard" if hard else "allen-cahn-front",
        title="Allen-Cahn, travelling front" + (" (hard BC)" if hard else ""),
        family=SEMI,
        source=(
            "Allen & Cahn, Acta Metall. 27 (1979); Nagumo front: McKean, Adv. Math. 4 (1970), "
            "Fife & McLeod, ARMA 65 (1977)"
        ),
        problem={
            "equation": "u_t = e^2*u_xx + u - u^3",
            "space": {"x": [-1.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"e": EPS_AC},
            "boundary": "dirichlet",
            "initial_value": "0.5*(1 + tanh(x/(2*sqrt(2)*e)))",
            "boundary_value": "0.5*(1 + tanh((x + 3*e*t/sqrt(2))/(2*sqrt(2)*e)))",
        },
        operator=_ac_op,
        fields=("u", "u_t", "u_xx"),
        exact=_ac_exact,
        regularity={
            # the range of u lets the boundary lifting bound its cross term sup |g'|
            "sup_abs_u": const(1.0, "0 < u < 1 (a front between the states 0 and 1)"),
            "sup_abs_u_x": const(
                g, "u_x = sech^2(.)/(2 W), W = 2 sqrt(2) e: sup = 1/(4 sqrt(2) e)"
            ),
        },
        model_keys={"sup_abs_model_u": "u", "sup_abs_model_u_x": "u_x"},
        train=TrainConfig(hidden=(24, 24), adam_steps=3000, lbfgs_iters=1200),
        lift=Lift(
            _ac_g,
            "u = g(t, x) + (x + 1)(1 - x)/4 N(t, x), g the linear interpolant of "
            "the boundary values",
        )
        if hard
        else None,
    )


def _fk_exact(t: FloatArray, x: FloatArray) -> FloatArray:
    return 1.0 / (1.0 + np.exp(x / math.sqrt(6) - 5.0 * t / 6.0)) ** 2


def _fk_op(f: Mapping[str, Any]) -> list[Any]:
    u = f["u"]
    return [f["u_t"] - f["u_xx"] - u * (1.0 - u)]


def fisher_kpp() -> Problem:
    """Fisher-KPP front of Ablowitz & Zeppetella (1979)."""
    g = 8.0 / (27.0 * math.sqrt(6))
    return Problem(
        key="fisher-kpp",
        title="Fisher-KPP, Ablowitz-Zeppetella front",
        family=SEMI,
        source="Ablowitz & Zeppetella, Bull. Math. Biol. 41 (1979) 835-840",
        problem={
            "equation": "u_t = D*u_xx + r*u*(1 - u)",
            "space": {"x": [-2.0, 2.0]},
            "time": [0.0, 1.0],
            "parameters": {"D": 1.0, "r": 1.0},
            "boundary": "dirichlet",
            "initial_value": "1/(1 + exp(x/sqrt(6)))^2",
            "boundary_value": "1/(1 + exp(x/sqrt(6) - 5*t/6))^2",
        },
        operator=_fk_op,
        fields=("u", "u_t", "u_xx"),
        exact=_fk_exact,
        regularity={
            "sup_abs_u": const(1.0, "0 < u < 1 (a front between the states 0 and 1)"),
            "sup_abs_u_x": const(
                round(g + 5e-6, 5),
                "u_x = -(2/sqrt 6) E/(1+E)^3, E = exp(.): max at E = 1/2, 8/(27 sqrt 6) "
                "= 0.120963, rounded up",
            ),
        },
        model_keys={"sup_abs_model_u": "u", "sup_abs_model_u_x": "u_x"},
        train=TrainConfig(hidden=(20, 20), adam_steps=3000, lbfgs_iters=800),
    )
