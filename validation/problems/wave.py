"""Linear wave family: two closed forms of ``u_tt = c^2 u_xx`` on a Dirichlet interval.

* :func:`string_mode`: a guitar string pinned at both ends, plucked into its fundamental
  mode; separation of variables (W. A. Strauss, *Partial Differential Equations: An
  Introduction*, 2nd ed., Wiley 2008, sec. 4.1, eq. for the standing waves) gives

      u = sin(pi x) cos(pi c t),  c = 1,  u = 0 at x = 0 and x = 1.

* :func:`travelling_pulse`: a pressure pulse running along an organ pipe, the right-moving
  half of d'Alembert's solution (Strauss 2008, sec. 2.1, eq. (8))

      u = F(x - c t),  F(s) = exp(-10 (s - 0.3)^2),  c = 1/2,

  with the Dirichlet data and the initial velocity ``-c F'(x)`` taken from the closed form
  (inhomogeneous, time-dependent boundary data: the pulse reaches ``x = 1`` before ``T``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from validation.problems._base import FloatArray, Problem, TrainConfig, const

WAVE = "wave"
STRAUSS_MODE = (
    "standing wave by separation of variables: W. A. Strauss, Partial Differential Equations: "
    "An Introduction, 2nd ed., Wiley 2008, sec. 4.1"
)
STRAUSS_DALEMBERT = "d'Alembert's formula: Strauss 2008, sec. 2.1, eq. (8) (from memory)"

C_MODE = 1.0


def _mode_exact(t: FloatArray, x: FloatArray) -> FloatArray:
    return np.sin(math.pi * x) * np.cos(math.pi * C_MODE * t)


def _mode_op(f: Mapping[str, Any]) -> list[Any]:
    return [f["u_tt"] - C_MODE**2 * f["u_xx"]]


def string_mode() -> Problem:
    """The fundamental standing mode of a string pinned at both ends."""
    return Problem(
        key="wave-string-mode",
        title="wave, standing mode of a pinned string",
        family=WAVE,
        source=STRAUSS_MODE,
        problem={
            "equation": "u_tt = c^2*u_xx",
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"c": C_MODE},
            "boundary": "dirichlet",
            "initial_value": "sin(pi*x)",
            "initial_velocity": "0",
            "boundary_value": "0",
        },
        operator=_mode_op,
        fields=("u_tt", "u_xx"),
        exact=_mode_exact,
        regularity={
            "sup_abs_u_x": const(
                math.pi, "u_x = pi cos(pi x) cos(pi c t), so |u_x| <= pi (attained at t = 0)"
            )
        },
        model_keys={"sup_abs_model_u_x": "u_x"},
        train=TrainConfig(hidden=(20, 20), adam_steps=2500, lbfgs_iters=700),
    )


C_PULSE, A_PULSE, S0_PULSE = 0.5, 10.0, 0.3


def _pulse_exact(t: FloatArray, x: FloatArray) -> FloatArray:
    s = x - C_PULSE * t - S0_PULSE
    return np.exp(-A_PULSE * s * s)


def _pulse_op(f: Mapping[str, Any]) -> list[Any]:
    return [f["u_tt"] - C_PULSE**2 * f["u_xx"]]


def travelling_pulse() -> Problem:
    """A Gaussian pulse travelling right at speed c = 1/2 (d'Alembert)."""
    # max |F'| = sqrt(2 a) e^{-1/2} at s = 1/sqrt(2 a)
    sup_ux = math.sqrt(2 * A_PULSE) * math.exp(-0.5)
    return Problem(
        key="wave-travelling-pulse",
        title="wave, travelling pulse (d'Alembert)",
        family=WAVE,
        source=STRAUSS_DALEMBERT,
        problem={
            "equation": "u_tt = c^2*u_xx",
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"c": C_PULSE},
            "boundary": "dirichlet",
            "initial_value": f"exp(-{A_PULSE:g}*(x - {S0_PULSE:g})^2)",
            "initial_velocity": (
                f"{2 * A_PULSE * C_PULSE:g}*(x - {S0_PULSE:g})"
                f"*exp(-{A_PULSE:g}*(x - {S0_PULSE:g})^2)"
            ),
            "boundary_value": f"exp(-{A_PULSE:g}*(x - c*t - {S0_PULSE:g})^2)",
        },
        operator=_pulse_op,
        fields=("u_tt", "u_xx"),
        exact=_pulse_exact,
        regularity={
            "sup_abs_u_x": const(
                sup_ux,
                "u_x = F'(x - c t), |F'(s)| = 2 a |s - s0| e^{-a (s - s0)^2} <= sqrt(2 a) e^{-1/2}",
            )
        },
        model_keys={"sup_abs_model_u_x": "u_x"},
        train=TrainConfig(hidden=(24, 24), adam_steps=3000, lbfgs_iters=800),
    )
