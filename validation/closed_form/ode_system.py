"""ODE systems y' = F(t, y): closed-form solutions of classical ODE texts.

The Euclidean error at each time is bounded (the "space" of the family is one point).
"""

from __future__ import annotations

from collections.abc import Sequence

import sympy as sp

from validation.closed_form._case import ClosedFormCase, t

FAMILY = "ode-system"


def _riccati(v: Sequence[sp.Expr]) -> list[sp.Expr]:
    return [sp.diff(v[0], t) - (1 + v[0] ** 2)]


def _logistic(r: float, k: float):  # type: ignore[no-untyped-def]
    return lambda v: [sp.diff(v[0], t) - r * v[0] * (1 - v[0] / k)]


def _oscillator(v: Sequence[sp.Expr]) -> list[sp.Expr]:
    return [sp.diff(v[0], t) - v[1], sp.diff(v[1], t) + v[0]]


def _spiral(a: float, b: float):  # type: ignore[no-untyped-def]
    return lambda v: [
        sp.diff(v[0], t) - (-a * v[0] + b * v[1]),
        sp.diff(v[1], t) - (-b * v[0] - a * v[1]),
    ]


CASES: tuple[ClosedFormCase, ...] = (
    ClosedFormCase(
        key="riccati-tan",
        family=FAMILY,
        title="Riccati y' = 1 + y^2, y(0) = 0: y = tan t on [0, 1]",
        source="separable equation; Boyce & DiPrima, Elementary Differential Equations, ch. 2 "
        "(interval of existence |t| < pi/2) [from memory]",
        problem={
            "equation": "y_t = 1 + y^2",
            "unknowns": ["y"],
            "time": [0.0, 1.0],
            "initial_value": "0",
        },
        exact=(sp.tan(t),),
        perturbation=(sp.cos(2 * t + sp.Rational(3, 10)),),
        operator=_riccati,
        regularity={"sup_abs_y": sp.tan(t)},  # tan t >= 0 on [0, 1]: time-varying box
        model_regularity={"sup_abs_model_y": 1.0},
    ),
    ClosedFormCase(
        key="logistic",
        family=FAMILY,
        title="logistic growth y' = r y (1 - y/K), r = 1, K = 2, y0 = 0.2 on [0, 3]",
        source="Verhulst, Correspondance mathematique et physique 10 (1838) 113-121: "
        "y = K / (1 + (K/y0 - 1) e^{-r t})",
        problem={
            "equation": "y' = r*y*(1 - y/K)",
            "unknowns": ["y"],
            "time": [0.0, 3.0],
            "parameters": {"r": 1.0, "K": 2.0},
            "initial_value": "0.2",
        },
        exact=(2 / (1 + 9 * sp.exp(-t)),),
        perturbation=(sp.cos(3 * t) / 2 + sp.sin(t + 1) / 2,),
        operator=_logistic(1.0, 2.0),
        # 0 < y < K: the one-sided keys give the box [-eps, K + eps]
        regularity={"sup_abs_y": 2.0, "sup_neg_y": 0.0},
        model_regularity={"sup_abs_model_y": 1.0, "sup_neg_model_y": 1.0},
    ),
    ClosedFormCase(
        key="harmonic-oscillator",
        family=FAMILY,
        title="harmonic oscillator y1' = y2, y2' = -y1: y = (cos t, -sin t) on [0, 5]",
        source="undamped spring-mass system; Boyce & DiPrima, Elementary Differential "
        "Equations, ch. 7 [from memory]",
        problem={
            "equation": ["y1' = y2", "y2' = -y1"],
            "unknowns": ["y1", "y2"],
            "time": [0.0, 5.0],
            "initial_value": ["1", "0"],
        },
        exact=(sp.cos(t), -sp.sin(t)),
        perturbation=(sp.cos(3 * t) + sp.Rational(1, 2), sp.sin(2 * t) - sp.Rational(1, 2)),
        operator=_oscillator,
    ),
    ClosedFormCase(
        key="damped-spiral",
        family=FAMILY,
        title="spiral sink y1' = -a y1 + b y2, y2' = -b y1 - a y2 (a = 0.5, b = 2) on [0, 4]",
        source="complex eigenvalues -a +- i b: y = e^{-a t} (cos bt, -sin bt); Boyce & "
        "DiPrima, ch. 7.6 [from memory]",
        problem={
            "equation": ["y1' = -a*y1 + b*y2", "y2' = -b*y1 - a*y2"],
            "unknowns": ["y1", "y2"],
            "time": [0.0, 4.0],
            "parameters": {"a": 0.5, "b": 2.0},
            "initial_value": ["1", "0"],
        },
        exact=(sp.exp(-t / 2) * sp.cos(2 * t), -sp.exp(-t / 2) * sp.sin(2 * t)),
        perturbation=(sp.exp(-t) * sp.cos(t) + sp.Rational(1, 4), sp.sin(3 * t + 1)),
        operator=_spiral(0.5, 2.0),
    ),
)
