"""Semilinear parabolic u_t = k u_xx + g(u): Allen-Cahn, Fisher-KPP and Nagumo waves."""

from __future__ import annotations

from collections.abc import Callable, Sequence

import sympy as sp

from validation.closed_form._case import PHI_TX, ClosedFormCase, t, x

FAMILY = "semilinear-parabolic"
SQ2 = sp.sqrt(2)


def _reaction(k: sp.Expr | float, g: Callable[[sp.Expr], sp.Expr]):  # type: ignore[no-untyped-def]
    def op(v: Sequence[sp.Expr]) -> list[sp.Expr]:
        return [sp.diff(v[0], t) - k * sp.diff(v[0], x, 2) - g(v[0])]

    return op


def _allen_cahn(v: sp.Expr) -> sp.Expr:
    return v - v**3


E = sp.Rational(1, 5)
_KINK = sp.tanh(x / (SQ2 * E))
_AC_FRONT = (1 + sp.tanh((x + 3 * E * t / SQ2) / (2 * SQ2 * E))) / 2
_FISHER = 1 / (1 + sp.exp(x / sp.sqrt(6) - sp.Rational(5, 6) * t)) ** 2
D_N, A_N = sp.Rational(1, 2), sp.Rational(1, 4)
_C_N = sp.sqrt(2 * D_N) * (A_N - sp.Rational(1, 2))
_NAGUMO = 1 / (1 + sp.exp(-(x - _C_N * t) / sp.sqrt(2 * D_N)))

_AC_PROBLEM = {
    "equation": "u_t = e^2*u_xx + u - u^3",
    "space": {"x": [-1.0, 1.0]},
    "time": [0.0, 1.0],
    "parameters": {"e": float(E)},
    "boundary": "dirichlet",
}

CASES: tuple[ClosedFormCase, ...] = (
    ClosedFormCase(
        key="allen-cahn-standing-kink",
        family=FAMILY,
        title="Allen-Cahn u_t = e^2 u_xx + u - u^3 (e = 0.2): standing kink tanh(x/(sqrt(2) e))",
        source="Allen & Cahn, Acta Metall. 27 (1979) 1085-1095 [from memory]; the kink solves "
        "e^2 u'' + u - u^3 = 0 (checked)",
        problem=_AC_PROBLEM,
        exact=(_KINK,),
        perturbation=(PHI_TX,),
        operator=_reaction(E**2, _allen_cahn),
        regularity={"sup_abs_u_x": float(1 / (SQ2 * E))},  # at x = 0
        model_regularity={"sup_abs_model_u_x": 5.0},
    ),
    ClosedFormCase(
        key="allen-cahn-travelling-front",
        family=FAMILY,
        title="Allen-Cahn (e = 0.2): front (1/2)[1 + tanh((x + 3 e t/sqrt(2))/(2 sqrt(2) e))] "
        "from 0 to 1, speed 3 e/sqrt(2)",
        source="travelling front of the bistable equation u - u^3 = u (1 - u)(u + 1): "
        "McKean, Adv. Math. 4 (1970) 209-223; Fife & McLeod, ARMA 65 (1977) 335-361 "
        "[from memory]",
        problem=_AC_PROBLEM,
        exact=(_AC_FRONT,),
        perturbation=(PHI_TX,),
        operator=_reaction(E**2, _allen_cahn),
        regularity={"sup_abs_u_x": float(1 / (4 * SQ2 * E))},
        model_regularity={"sup_abs_model_u_x": 5.0},
    ),
    ClosedFormCase(
        key="fisher-kpp-ablowitz-zeppetella",
        family=FAMILY,
        title="Fisher-KPP u_t = u_xx + u (1 - u): 1/(1 + exp(x/sqrt(6) - 5 t/6))^2",
        source="Ablowitz & Zeppetella, Bull. Math. Biol. 41 (1979) 835-840 (wave speed 5/sqrt(6))",
        problem={
            "equation": "u_t = D*u_xx + r*u*(1 - u)",
            "space": {"x": [-1.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"D": 1.0, "r": 1.0},
        },
        exact=(_FISHER,),
        perturbation=(PHI_TX,),
        operator=_reaction(1.0, lambda v: v * (1 - v)),
        # sup |u_x| = 8/(27 sqrt 6) = 0.12096; 0 < u < 1; |phi| <= 1.5, |phi_x| <= 5
        regularity={"sup_abs_u_x": 0.121, "sup_abs_u": 1.0},
        model_regularity={"sup_abs_model_u_x": 5.0, "sup_abs_model_u": 1.5},
    ),
    ClosedFormCase(
        key="nagumo-front",
        family=FAMILY,
        title="Nagumo u_t = D u_xx + u (1 - u)(u - a) (D = 1/2, a = 1/4): "
        "1/(1 + exp(-(x - c t)/sqrt(2 D))), c = sqrt(2 D)(a - 1/2)",
        source="McKean, Adv. Math. 4 (1970) 209-223 [from memory]",
        problem={
            "equation": "u_t = D*u_xx + u*(1 - u)*(u - a)",
            "space": {"x": [-1.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"D": float(D_N), "a": float(A_N)},
        },
        exact=(_NAGUMO,),
        perturbation=(PHI_TX,),
        operator=_reaction(D_N, lambda v: v * (1 - v) * (v - A_N)),
        regularity={"sup_abs_u_x": 0.25},  # u(1 - u) <= 1/4, sqrt(2 D) = 1
        model_regularity={"sup_abs_model_u_x": 5.0},
    ),
)
