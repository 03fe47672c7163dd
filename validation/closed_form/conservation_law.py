"""Viscous and inviscid Burgers u_t + u u_x = nu u_xx: a viscous shock, a Cole-Hopf mode and
the compressive linear profile."""

from __future__ import annotations

from collections.abc import Sequence

import sympy as sp

from validation.closed_form._case import PHI_TX, ClosedFormCase, t, x

FAMILY = "scalar-conservation-law"


def _burgers(nu: float):  # type: ignore[no-untyped-def]
    def op(v: Sequence[sp.Expr]) -> list[sp.Expr]:
        u = v[0]
        return [sp.diff(u, t) + u * sp.diff(u, x) - nu * sp.diff(u, x, 2)]

    return op


NU_S, UL, UR = 0.1, 1.0, -0.5
S, D = (UL + UR) / 2, UL - UR
_SHOCK = S - D / 2 * sp.tanh(D * (x - S * t) / (4 * NU_S))

# Cole-Hopf: phi = 1 + a e^{-nu k^2 t} cos(k x) solves the heat equation, u = -2 nu phi_x / phi
NU_C, A_C, K_C = 0.1, sp.Rational(2, 5), sp.pi
_E = A_C * sp.exp(-NU_C * K_C**2 * t)
_COLE_HOPF = 2 * NU_C * K_C * _E * sp.sin(K_C * x) / (1 + _E * sp.cos(K_C * x))
# u_x = 2 nu k^2 E (cos + E)/(1 + E cos)^2, increasing in cos for E < 1/2: the extremes are at
# cos = -1 (u_x = -2 nu k^2 E/(1 - E)) and cos = 1 (2 nu k^2 E/(1 + E))
_COLE_HOPF_UX = 2 * NU_C * K_C**2 * _E / (1 - _E)

_LINEAR = x / (t - 2)


def _linear_case(nu: float) -> ClosedFormCase:
    reg: dict[str, float | sp.Expr] = {"sup_neg_u_x": 1 / (2 - t)}
    model: dict[str, float] = {}
    if nu > 0:
        reg["sup_abs_u_x"] = 1 / (2 - t)
        model["sup_abs_model_u_x"] = 5.0
    return ClosedFormCase(
        key=f"burgers-compressive-linear-nu{nu:g}",
        family=FAMILY,
        title=f"Burgers (nu = {nu:g}): compressive profile u = x/(t - 2), u_x = -1/(2 - t), "
        "on [0, 1] x [0, 1.5]",
        source="u = (a x + b)/(1 + a t) solves Burgers for every nu (u_xx = 0); breaking of a "
        "compressive profile: Whitham, Linear and Nonlinear Waves, 1974, sec. 2.1 [from memory]",
        problem={
            "equation": "u_t + u*u_x = nu*u_xx",
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, 1.5],
            "parameters": {"nu": nu},
            "initial_value": "-x/2",
            "boundary_value": "x/(t - 2)",
        },
        exact=(_LINEAR,),
        perturbation=(PHI_TX,),
        operator=_burgers(nu),
        regularity=reg,
        model_regularity=model,
    )


CASES: tuple[ClosedFormCase, ...] = (
    ClosedFormCase(
        key="burgers-viscous-shock",
        family=FAMILY,
        title="viscous Burgers (nu = 0.1): shock profile s - (d/2) tanh(d (x - s t)/(4 nu)), "
        "u_L = 1, u_R = -0.5",
        source="Burgers, Adv. Appl. Mech. 1 (1948) 171-199; Whitham, Linear and Nonlinear "
        "Waves, 1974, sec. 4.3 [from memory]; sup |u_x| = d^2/(8 nu)",
        problem={
            "equation": "u_t + u*u_x = nu*u_xx",
            "space": {"x": [-1.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"nu": NU_S},
            "boundary": "dirichlet",
        },
        exact=(_SHOCK,),
        perturbation=(PHI_TX,),
        operator=_burgers(NU_S),
        regularity={
            "sup_abs_u_x": D**2 / (8 * NU_S),
            "sup_neg_u_x": D**2 / (8 * NU_S),
            "sup_abs_u": max(abs(UL), abs(UR)),
        },
        model_regularity={"sup_abs_model_u_x": 5.0, "sup_abs_model_u": 1.5},
    ),
    ClosedFormCase(
        key="burgers-cole-hopf-mode",
        family=FAMILY,
        title="viscous Burgers (nu = 0.1) on [-1, 1]: Cole-Hopf transform of the heat mode "
        "1 + 0.4 e^{-nu pi^2 t} cos(pi x)",
        source="Hopf, Comm. Pure Appl. Math. 3 (1950) 201-230; Cole, Quart. Appl. Math. 9 (1951) "
        "225-236; Whitham 1974, sec. 4.2 [from memory]: u = -2 nu phi_x/phi",
        problem={
            "equation": "u_t + u*u_x = nu*u_xx",
            "space": {"x": [-1.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"nu": NU_C},
            "boundary": "dirichlet",
        },
        exact=(_COLE_HOPF,),
        perturbation=(PHI_TX,),
        operator=_burgers(NU_C),
        regularity={
            "sup_abs_u_x": _COLE_HOPF_UX,
            "sup_neg_u_x": _COLE_HOPF_UX,
            # max of sin/(1 + E cos) is 1/sqrt(1 - E^2), E <= a
            "sup_abs_u": float(2 * NU_C * K_C * A_C / sp.sqrt(1 - A_C**2)),
        },
        model_regularity={"sup_abs_model_u_x": 5.0, "sup_abs_model_u": 1.5},
    ),
    _linear_case(0.05),
    _linear_case(0.0),
)
