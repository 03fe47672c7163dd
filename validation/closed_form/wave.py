"""Linear wave equations u_tt + b u_t - c^2 u_xx + m u = 0: a standing string mode, a damped
mode and a Klein-Gordon mode (fixed ends)."""

from __future__ import annotations

from collections.abc import Sequence

import sympy as sp

from validation.closed_form._case import PHI_TX, ClosedFormCase, t, x

FAMILY = "wave"
PI = sp.pi


def _wave(c: float, b: float = 0.0, m: float = 0.0):  # type: ignore[no-untyped-def]
    def op(v: Sequence[sp.Expr]) -> list[sp.Expr]:
        u = v[0]
        return [sp.diff(u, t, 2) + b * sp.diff(u, t) - c**2 * sp.diff(u, x, 2) + m * u]

    return op


C1 = 2.0
_STANDING = sp.sin(2 * PI * x) * sp.cos(4 * PI * t)  # k = 2, c = 2
B2 = 0.5
_W2 = sp.sqrt(PI**2 - B2**2 / 4)  # c = 1, k = 1: omega^2 = pi^2 - b^2/4
_DAMPED = sp.exp(-B2 * t / 2) * sp.sin(PI * x) * sp.cos(_W2 * t)
M3 = 3.0
_W3 = sp.sqrt(PI**2 + M3)
_KLEIN_GORDON = sp.sin(PI * x) * sp.cos(_W3 * t)
_FIXED_ENDS = {"space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0], "boundary": "dirichlet"}

CASES: tuple[ClosedFormCase, ...] = (
    ClosedFormCase(
        key="wave-standing-string-mode",
        family=FAMILY,
        title="u_tt = c^2 u_xx (c = 2) on [0, 1], fixed ends: u = sin(2 pi x) cos(4 pi t)",
        source="separation of variables for the fixed string: Strauss, PDE: An Introduction, "
        "2nd ed. 2008, sec. 4.1 [from memory]",
        problem={
            "equation": "u_tt = c^2*u_xx",
            "parameters": {"c": C1},
            "initial_value": "sin(2*pi*x)",
            "initial_velocity": "0",
            "boundary_value": "0",
            **_FIXED_ENDS,
        },
        exact=(_STANDING,),
        perturbation=(PHI_TX,),
        operator=_wave(C1),
        regularity={"sup_abs_u_x": float(2 * PI)},
        model_regularity={"sup_abs_model_u_x": 5.0},
        sharp_initial=False,  # the energy holds w_t and w_x: at t0 the bound exceeds |w|
    ),
    ClosedFormCase(
        key="wave-damped-mode",
        family=FAMILY,
        title="damped wave u_tt + b u_t = u_xx (b = 0.5), fixed ends: "
        "u = e^{-b t/2} sin(pi x) cos(sqrt(pi^2 - b^2/4) t)",
        source="telegraph / damped string, separation of variables: Strauss 2008, sec. 4.1 "
        "exercises; Evans 2010, sec. 2.4 [from memory]",
        problem={"equation": "u_tt + b*u_t = u_xx", "parameters": {"b": B2}, **_FIXED_ENDS},
        exact=(_DAMPED,),
        perturbation=(PHI_TX,),
        operator=_wave(1.0, b=B2),
        regularity={"sup_abs_u_x": PI * sp.exp(-B2 * t / 2)},
        model_regularity={"sup_abs_model_u_x": 5.0},
        sharp_initial=False,  # the energy holds w_t and w_x: at t0 the bound exceeds |w|
    ),
    ClosedFormCase(
        key="klein-gordon-mode",
        family=FAMILY,
        title="Klein-Gordon u_tt = u_xx - m u (m = 3), fixed ends: "
        "u = sin(pi x) cos(sqrt(pi^2 + m) t)",
        source="dispersion relation omega^2 = k^2 + m of the Klein-Gordon equation: Whitham, "
        "Linear and Nonlinear Waves, 1974, sec. 11.1 [from memory]",
        problem={"equation": "u_tt = u_xx - m*u", "parameters": {"m": M3}, **_FIXED_ENDS},
        exact=(_KLEIN_GORDON,),
        perturbation=(PHI_TX,),
        operator=_wave(1.0, m=M3),
        regularity={"sup_abs_u_x": float(PI)},
        model_regularity={"sup_abs_model_u_x": 5.0},
        sharp_initial=False,  # the energy holds w_t and w_x: at t0 the bound exceeds |w|
    ),
)
