"""Linear advection-diffusion-reaction: Fourier modes, a spreading Gaussian pulse, a 2-D mode."""

from __future__ import annotations

from collections.abc import Sequence

import sympy as sp

from validation.closed_form._case import PHI_TX, ClosedFormCase, t, x, y

FAMILY = "linear-advection-diffusion-reaction"


def _adr(a: float, k: float, c: float):  # type: ignore[no-untyped-def]
    def op(v: Sequence[sp.Expr]) -> list[sp.Expr]:
        u = v[0]
        return [sp.diff(u, t) + a * sp.diff(u, x) - k * sp.diff(u, x, 2) + c * u]

    return op


def _heat_2d(k: float):  # type: ignore[no-untyped-def]
    def op(v: Sequence[sp.Expr]) -> list[sp.Expr]:
        u = v[0]
        return [sp.diff(u, t) - k * (sp.diff(u, x, 2) + sp.diff(u, y, 2))]

    return op


K_HEAT = 0.4
_HEAT = (
    1
    - sp.Rational(4, 5) * x
    + sp.Rational(3, 5) * sp.exp(-K_HEAT * sp.pi**2 * t) * sp.sin(sp.pi * x)
)

A_M, K_M, C_M, M_M = 1.5, 0.1, 0.3, 2.0
_MODE = sp.exp(-(K_M * M_M**2 + C_M) * t) * sp.sin(M_M * (x - A_M * t))

A_G, K_G, TAU0 = 1.0, 0.05, 0.5
_TAU = t + TAU0
_GAUSS = sp.exp(-((x - A_G * t) ** 2) / (4 * K_G * _TAU)) / sp.sqrt(4 * sp.pi * K_G * _TAU)

K_2D = 0.1
_MODE_2D = sp.exp(-2 * sp.pi**2 * K_2D * t) * sp.sin(sp.pi * x) * sp.sin(sp.pi * y)

B_P = 2.0
_PHI_PERIODIC = sp.sin(3 * t + 1) * (sp.cos(x) + x / (2 * sp.pi)) / 2  # not periodic in x

CASES: tuple[ClosedFormCase, ...] = (
    ClosedFormCase(
        key="periodic-advection-sine",
        family=FAMILY,
        title="periodic advection u_t + b u_x = 0 (b = 2) on [0, 2 pi]: u = sin(x - b t)",
        source="characteristics, u = u0(x - b t): Strauss 2008, sec. 1.2; the PINN benchmark of "
        "Krishnapriyan et al., NeurIPS 2021 (arXiv 2109.01050) [from memory]",
        problem={
            "equation": "u_t + b*u_x = 0",
            "space": {"x": [0.0, 2 * 3.141592653589793]},
            "time": [0.0, 1.0],
            "parameters": {"b": B_P},
            "boundary": "periodic",
        },
        exact=(sp.sin(x - B_P * t),),
        perturbation=(_PHI_PERIODIC,),
        operator=_adr(B_P, 0.0, 0.0),
        # the periodicity mismatch of phi is not zero: the face terms need |u|, |u_model|
        regularity={"sup_abs_u": 1.0},
        model_regularity={"sup_abs_model_u": 1.0},  # |cos x| + x/(2 pi) <= 2 on the box
    ),
    ClosedFormCase(
        key="heat-fourier-dirichlet",
        family=FAMILY,
        title="heat u_t = k u_xx (k = 0.4), inhomogeneous Dirichlet: "
        "u = 1 - 0.8 x + 0.6 e^{-k pi^2 t} sin(pi x)",
        source="Fourier's method with a steady affine part: Carslaw & Jaeger, Conduction of Heat "
        "in Solids, 2nd ed. 1959; Strauss, PDE: An Introduction, 2008, sec. 4.1 [from memory; "
        "sections not re-checked]",
        problem={
            "equation": "u_t = k*u_xx",
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, 0.5],
            "parameters": {"k": K_HEAT},
            "boundary": "dirichlet",
            "initial_value": "1 - 0.8*x + 0.6*sin(pi*x)",
            "boundary_value": "1 - 0.8*x",
        },
        exact=(_HEAT,),
        perturbation=(PHI_TX,),
        operator=_adr(0.0, K_HEAT, 0.0),
        regularity={
            "sup_abs_u_x": sp.Rational(4, 5)
            + sp.Rational(3, 5) * sp.pi * sp.exp(-K_HEAT * sp.pi**2 * t)
        },
        model_regularity={"sup_abs_model_u_x": 5.0},  # |phi_x| <= 2 + 3 on [0, 1]
    ),
    ClosedFormCase(
        key="adr-travelling-mode",
        family=FAMILY,
        title="u_t + a u_x = k u_xx - c u (a = 1.5, k = 0.1, c = 0.3): damped travelling mode "
        "e^{-(k m^2 + c) t} sin(m (x - a t)), m = 2",
        source="Fourier mode in the moving frame x - a t: Strauss, PDE: An Introduction, 2008, "
        "sec. 2.4 and 4.1 [from memory]",
        problem={
            "equation": "u_t + a*u_x = k*u_xx - c*u",
            "space": {"x": [0.0, 3.0]},
            "time": [0.0, 1.0],
            "parameters": {"a": A_M, "k": K_M, "c": C_M},
        },
        exact=(_MODE,),
        perturbation=(PHI_TX,),
        operator=_adr(A_M, K_M, C_M),
        regularity={"sup_abs_u_x": M_M * sp.exp(-(K_M * M_M**2 + C_M) * t)},
        model_regularity={"sup_abs_model_u_x": 25.0},  # |phi_x| <= 6 + 19 on [0, 3]
    ),
    ClosedFormCase(
        key="advected-gaussian-pulse",
        family=FAMILY,
        title="u_t + a u_x = k u_xx (a = 1, k = 0.05): spreading Gaussian pulse "
        "(4 pi k tau)^{-1/2} exp(-(x - a t)^2/(4 k tau)), tau = t + 0.5",
        source="heat kernel (fundamental solution) in the frame x - a t: Evans, PDE, 2nd ed. 2010, "
        "sec. 2.3.1; Carslaw & Jaeger 1959 [from memory]",
        problem={
            "equation": "u_t + a*u_x = k*u_xx",
            "space": {"x": [-1.5, 2.5]},
            "time": [0.0, 1.0],
            "parameters": {"a": A_G, "k": K_G},
        },
        exact=(_GAUSS,),
        perturbation=(sp.sin(3 * t + 1) * sp.cos(x + sp.Rational(1, 2)) / 2,),
        operator=_adr(A_G, K_G, 0.0),
        # max |u_x| at |x - a t| = sqrt(2 k tau): e^{-1/2} / (k tau sqrt(8 pi))
        regularity={"sup_abs_u_x": sp.exp(-sp.Rational(1, 2)) / (K_G * _TAU * sp.sqrt(8 * sp.pi))},
        model_regularity={"sup_abs_model_u_x": 0.5},
    ),
    ClosedFormCase(
        key="heat-2d-mode",
        family=FAMILY,
        title="2-D heat u_t = k (u_xx + u_yy) (k = 0.1) on the unit square: "
        "e^{-2 pi^2 k t} sin(pi x) sin(pi y)",
        source="separation of variables on a rectangle: Strauss 2008, ch. 10; Carslaw & Jaeger "
        "1959 [from memory; sections not re-checked]",
        problem={
            "equation": "u_t = k*(u_xx + u_yy)",
            "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
            "time": [0.0, 0.5],
            "parameters": {"k": K_2D},
        },
        exact=(_MODE_2D,),
        perturbation=(PHI_TX * (1 + y),),
        operator=_heat_2d(K_2D),
        regularity={
            "sup_abs_u_x": sp.pi * sp.exp(-2 * sp.pi**2 * K_2D * t),
            "sup_abs_u_y": sp.pi * sp.exp(-2 * sp.pi**2 * K_2D * t),
        },
        # |phi_x| <= 5 * 2, |phi_y| <= 1.5 on the unit square
        model_regularity={"sup_abs_model_u_x": 10.0, "sup_abs_model_u_y": 1.5},
        points={"t": 8, "x": 10, "y": 10},
    ),
)
