"""Linear advection-diffusion-reaction family: two heat-type problems with closed forms.

* :func:`heat_dirichlet`: ``u_t = k u_xx`` on ``(0, 1)`` with inhomogeneous Dirichlet data.
  Subtracting the steady state ``1 - x/2`` leaves a homogeneous problem whose initial value is
  a finite sine series; separation of variables gives (W. A. Strauss, *Partial Differential
  Equations: An Introduction*, 2nd ed., Wiley 2008, ch. 4 and sec. 5.6)

      u = 1 - x/2 + exp(-k pi^2 t) sin(pi x) + 0.3 exp(-4 k pi^2 t) sin(2 pi x).

* :func:`advection_diffusion_mode`: ``u_t + a u_x = k u_xx``; in the moving frame
  ``xi = x - a t`` it is the heat equation, whose Fourier mode decays like ``exp(-k m^2 t)``
  (Strauss 2008, sec. 1.2 for the transport part and ch. 4 for the mode):

      u = exp(-k m^2 t) sin(m (x - a t)),  m = 2 pi, Dirichlet data from u.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from validation.problems._base import FloatArray, Lift, Problem, Reg, TrainConfig, const

ADR = "linear-advection-diffusion-reaction"
STRAUSS = (
    "separation of variables with a steady-state shift: W. A. Strauss, Partial Differential "
    "Equations: An Introduction, 2nd ed., Wiley 2008, ch. 4 and sec. 5.6"
)

K_HEAT = 0.2


def _heat_exact(t: FloatArray, x: FloatArray) -> FloatArray:
    k = K_HEAT
    return (
        1.0
        - 0.5 * x
        + np.exp(-k * math.pi**2 * t) * np.sin(math.pi * x)
        + 0.3 * np.exp(-4 * k * math.pi**2 * t) * np.sin(2 * math.pi * x)
    )


def _heat_op(f: Mapping[str, Any]) -> list[Any]:
    return [f["u_t"] - K_HEAT * f["u_xx"]]


def heat_dirichlet(
    *,
    hidden: tuple[int, ...] = (20, 20),
    adam_steps: int = 3000,
    lbfgs_iters: int = 800,
    hard: bool = False,
    key: str | None = None,
    t_end: float = 0.5,
) -> Problem:
    """The heat equation with inhomogeneous Dirichlet data (Strauss 2008, ch. 4)."""
    k = K_HEAT
    a1, a2 = k * math.pi**2, 4 * k * math.pi**2
    expr = f"0.5 + pi*exp(-{a1:.17g}*t) + 0.6*pi*exp(-{a2:.17g}*t)"
    g_ux = Reg(
        expr,
        lambda t: 0.5 + math.pi * np.exp(-a1 * t) + 0.6 * math.pi * np.exp(-a2 * t),
        "u_x = -1/2 + pi e^{-k pi^2 t} cos(pi x) + 0.6 pi e^{-4 k pi^2 t} cos(2 pi x); "
        "|cos| <= 1 and the triangle inequality give the time-varying bound",
    )
    c_ux = const(0.5 + 1.6 * math.pi, "the same bound at t = 0, used for all t (constant sup)")
    lift = Lift(
        g=lambda t, x, lib: 1.0 - 0.5 * x,
        description="u = (1 - x/2) + x (1 - x) N(t, x): the steady state carries the data",
    )
    name = key or ("heat-dirichlet-hard" if hard else "heat-dirichlet")
    return Problem(
        key=name,
        title="heat, inhomogeneous Dirichlet data" + (" (hard BC)" if hard else ""),
        family=ADR,
        source=STRAUSS,
        problem={
            "equation": "u_t = k*u_xx",
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, t_end],
            "parameters": {"k": k},
            "boundary": "dirichlet",
            "initial_value": "1 - 0.5*x + sin(pi*x) + 0.3*sin(2*pi*x)",
            "boundary_value": "1 - 0.5*x",
        },
        operator=_heat_op,
        fields=("u_t", "u_xx"),
        exact=_heat_exact,
        regularity={"sup_abs_u_x": g_ux},
        variants={"constant sups": {"sup_abs_u_x": c_ux}},
        model_keys={"sup_abs_model_u_x": "u_x"},
        train=TrainConfig(hidden=hidden, adam_steps=adam_steps, lbfgs_iters=lbfgs_iters),
        lift=lift if hard else None,
    )


A_ADV, K_ADV, M_ADV = 1.0, 0.02, 2 * math.pi


def _adv_exact(t: FloatArray, x: FloatArray) -> FloatArray:
    return np.exp(-K_ADV * M_ADV**2 * t) * np.sin(M_ADV * (x - A_ADV * t))


def _adv_op(f: Mapping[str, Any]) -> list[Any]:
    return [f["u_t"] + A_ADV * f["u_x"] - K_ADV * f["u_xx"]]


def advection_diffusion_mode() -> Problem:
    """A damped travelling Fourier mode of linear advection-diffusion."""
    rate = K_ADV * M_ADV**2
    g_ux = Reg(
        f"2*pi*exp(-{rate:.17g}*t)",
        lambda t: M_ADV * np.exp(-rate * t),
        "u_x = m e^{-k m^2 t} cos(m (x - a t)), so |u_x| <= m e^{-k m^2 t} (m = 2 pi)",
    )
    return Problem(
        key="advdiff-mode",
        title="advection-diffusion, damped travelling mode",
        family=ADR,
        source=(
            "Fourier mode in the frame x - a t (transport + heat): Strauss 2008, sec. 1.2 and ch. 4"
        ),
        problem={
            "equation": "u_t + a*u_x = k*u_xx",
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"a": A_ADV, "k": K_ADV},
            "boundary": "dirichlet",
            "initial_value": "sin(2*pi*x)",
            "boundary_value": f"exp(-{rate:.17g}*t)*sin(2*pi*(x - a*t))",
        },
        operator=_adv_op,
        fields=("u_t", "u_x", "u_xx"),
        exact=_adv_exact,
        regularity={"sup_abs_u_x": g_ux},
        variants={"constant sups": {"sup_abs_u_x": const(M_ADV, "sup at t = 0: 2 pi")}},
        model_keys={"sup_abs_model_u_x": "u_x"},
        train=TrainConfig(hidden=(24, 24), adam_steps=3000, lbfgs_iters=1000),
    )
