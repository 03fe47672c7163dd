"""Steady linear elliptic problems: manufactured modes, a polynomial and a harmonic function.

Only ``l2_space`` is bounded (no time, no profile)."""

from __future__ import annotations

from collections.abc import Sequence

import sympy as sp

from validation.closed_form._case import ClosedFormCase, x, y

FAMILY = "linear-elliptic"


def _lap(u: sp.Expr) -> sp.Expr:
    return sp.diff(u, x, 2) + sp.diff(u, y, 2)


_SIN2 = sp.sin(sp.pi * x) * sp.sin(sp.pi * y)
_PHI_X = sp.cos(3 * x + 1) + x**2
_PHI_XY = sp.exp(x - y) * sp.cos(2 * y)


def _poisson_1d(v: Sequence[sp.Expr]) -> list[sp.Expr]:
    return [-sp.diff(v[0], x, 2) - sp.pi**2 * sp.sin(sp.pi * x)]


def _screened(v: Sequence[sp.Expr]) -> list[sp.Expr]:
    return [-_lap(v[0]) + 2 * v[0] - (2 * sp.pi**2 + 2) * _SIN2]


CASES: tuple[ClosedFormCase, ...] = (
    ClosedFormCase(
        key="poisson-1d-sine",
        family=FAMILY,
        title="-u'' = pi^2 sin(pi x) on (0, 2): u = sin(pi x)",
        source="method of manufactured solutions: Roache, J. Fluids Eng. 124 (2002) 4-10",
        problem={
            "equation": "-u_xx = pi^2*sin(pi*x)",
            "space": {"x": [0.0, 2.0]},
            "boundary_value": "0",
        },
        exact=(sp.sin(sp.pi * x),),
        perturbation=(_PHI_X,),
        operator=_poisson_1d,
        points={"x": 48},
    ),
    ClosedFormCase(
        key="poisson-1d-parabola",
        family=FAMILY,
        title="-u'' = 2 on (0, 1), u(0) = u(1) = 0: u = x (1 - x)",
        source="textbook closed form (constant load on a string): Gilbarg & Trudinger, Elliptic "
        "PDE of Second Order, 1983, ch. 3 comparison function [from memory]",
        problem={"equation": "-u_xx = 2", "space": {"x": [0.0, 1.0]}},
        exact=(x * (1 - x),),
        perturbation=(_PHI_X,),
        operator=lambda v: [-sp.diff(v[0], x, 2) - 2],
        points={"x": 32},
    ),
    ClosedFormCase(
        key="screened-poisson-2d-mode",
        family=FAMILY,
        title="-Lap u + 2 u = (2 pi^2 + 2) sin(pi x) sin(pi y) on (0, 1)^2: "
        "u = sin(pi x) sin(pi y)",
        source="Dirichlet eigenfunction of the Laplacian on the square (manufactured source; "
        "Roache 2002)",
        problem={
            "equation": "-(u_xx + u_yy) + 2*u = (2*pi^2 + 2)*sin(pi*x)*sin(pi*y)",
            "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
        },
        exact=(_SIN2,),
        perturbation=(_PHI_XY,),
        operator=_screened,
        points={"x": 20, "y": 20},
    ),
    ClosedFormCase(
        key="laplace-2d-harmonic",
        family=FAMILY,
        title="Laplace -Lap u = 0 on (0, 1)^2 with Dirichlet data: u = e^x sin(y)",
        source="harmonic function Im(e^z), z = x + i y (real and imaginary parts of a holomorphic "
        "function are harmonic; e.g. Evans 2010, sec. 2.2)",
        problem={
            "equation": "-(u_xx + u_yy) = 0",
            "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
            "boundary_value": "exp(x)*sin(y)",
        },
        exact=(sp.exp(x) * sp.sin(y),),
        perturbation=(_PHI_XY,),
        operator=lambda v: [-_lap(v[0])],
        points={"x": 20, "y": 20},
    ),
)
