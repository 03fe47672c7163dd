"""ODE system family: the Riccati equation with blow-up and the harmonic oscillator.

* :func:`riccati_tan`: ``y' = 1 + y^2``, ``y(0) = 0``, exact ``y = tan t`` on ``|t| < pi/2``
  (separable; W. E. Boyce, R. C. DiPrima, *Elementary Differential Equations*, ch. 2, where
  this interval of existence is the standard example).
* :func:`oscillator`: ``y1' = y2``, ``y2' = -y1``, ``y = (cos t, -sin t)`` (undamped
  spring-mass system, Boyce & DiPrima, ch. 3 and 7); the Jacobian is skew, log-norm 0.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from validation.problems._base import Problem, Reg, TrainConfig, const

ODE = "ode-system"
BOYCE = "separable ODE: W. E. Boyce, R. C. DiPrima, Elementary Differential Equations, ch. 2"


def _tan_op(f: Mapping[str, Any]) -> list[Any]:
    y = f["y"]
    return [f["y_t"] - 1.0 - y * y]


def riccati_tan(t_end: float = 1.2, *, key: str | None = None) -> Problem:
    """``y' = 1 + y^2``, ``y = tan t``: blow-up at ``pi/2``."""
    tan = Reg("tan(t)", np.tan, "y = tan t >= 0 and increasing on [0, pi/2)")
    t_c = min(t_end, math.pi / 2 - 1e-3)
    return Problem(
        key=key or f"riccati-tan-T{t_end:g}",
        title=f"Riccati y' = 1 + y^2, y = tan t, T = {t_end:g}",
        family=ODE,
        source=BOYCE,
        problem={
            "equation": "y_t = 1 + y^2",
            "unknowns": ["y"],
            "time": [0.0, t_end],
            "initial_value": "0",
        },
        operator=_tan_op,
        fields=("y", "y_t"),
        exact=lambda t: np.tan(np.asarray(t))[:, None],
        regularity={"sup_abs_y": tan},
        variants={"constant sups": {"sup_abs_y": const(math.tan(t_c), "tan T: the sup on [0, T]")}},
        model_keys={"sup_abs_model_y": "y"},
        axes=("t",),
        outputs=("y",),
        points={"t": 64},
        panels={"t": 8},
        train=TrainConfig(
            hidden=(20, 20),
            adam_steps=3000,
            lbfgs_iters=1000,
            n_col=400,
            out_scale=max(1.0, math.tan(min(t_end, math.pi / 2 - 0.05)) / 2),
        ),
    )


def _osc_op(f: Mapping[str, Any]) -> list[Any]:
    return [f["y1_t"] - f["y2"], f["y2_t"] + f["y1"]]


def oscillator() -> Problem:
    """Harmonic oscillator as a first-order linear system."""
    return Problem(
        key="oscillator",
        title="harmonic oscillator y1' = y2, y2' = -y1",
        family=ODE,
        source="undamped spring-mass system: Boyce & DiPrima, Elementary Differential "
        "Equations, ch. 3 and 7",
        problem={
            "equation": ["y1' = y2", "y2' = -y1"],
            "unknowns": ["y1", "y2"],
            "time": [0.0, 6.0],
            "initial_value": ["1", "0"],
        },
        operator=_osc_op,
        fields=("y1", "y2", "y1_t", "y2_t"),
        exact=lambda t: np.stack([np.cos(t), -np.sin(t)], axis=-1),
        regularity={},
        model_keys={},
        axes=("t",),
        outputs=("y1", "y2"),
        points={"t": 64},
        panels={"t": 8},
        train=TrainConfig(hidden=(20, 20), adam_steps=3000, lbfgs_iters=1000, n_col=400),
    )
