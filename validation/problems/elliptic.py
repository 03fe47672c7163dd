"""Linear elliptic family (steady, ``l2_space`` only): two problems with closed forms.

* :func:`poisson_square_mode`: ``-(u_xx + u_yy) = 2 pi^2 sin(pi x) sin(pi y)`` on the unit
  square with zero Dirichlet data. ``sin(pi x) sin(pi y)`` is the first Dirichlet eigenfunction
  of ``-Lap`` on the square (eigenvalue ``2 pi^2``), found by separation of variables (L. C.
  Evans, *Partial Differential Equations*, 2nd ed., AMS 2010, sec. 4.1 on separation of
  variables [section number from memory]), so ``u = sin(pi x) sin(pi y)``.
* :func:`wall_profile`: a steady temperature profile in a wall with an internal heat sink,
  ``-u_xx = -exp(x)`` on ``(0, 1)`` with the face temperatures ``u(0) = 1``, ``u(1) = e``; the
  manufactured solution (P. J. Roache, J. Fluids Eng. 124 (2002) 4-10) is ``u = exp(x)``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from validation.problems._base import FloatArray, Problem, TrainConfig

ELLIPTIC = "linear-elliptic"


def _mode_exact(x: FloatArray, y: FloatArray) -> FloatArray:
    return np.sin(math.pi * x) * np.sin(math.pi * y)


def _mode_source(x: FloatArray, y: FloatArray) -> FloatArray:
    return 2 * math.pi**2 * _mode_exact(x, y)


def _mode_op(f: Mapping[str, Any]) -> list[Any]:
    return [-(f["u_xx"] + f["u_yy"]) - f["f"]]


def poisson_square_mode() -> Problem:
    """The Poisson problem whose solution is the first Dirichlet mode of the unit square."""
    return Problem(
        key="poisson-square-mode",
        title="Poisson on the unit square, first Dirichlet mode",
        family=ELLIPTIC,
        source=(
            "separation of variables, first Dirichlet eigenfunction of the square: L. C. Evans, "
            "Partial Differential Equations, 2nd ed., AMS 2010, sec. 4.1 [from memory]"
        ),
        problem={
            "equation": "-(u_xx + u_yy) = 2*pi^2*sin(pi*x)*sin(pi*y)",
            "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
            "boundary": "dirichlet",
            "boundary_value": "0",
        },
        operator=_mode_op,
        fields=("u_xx", "u_yy"),
        exact=_mode_exact,
        source_term=_mode_source,
        regularity={},
        model_keys={},
        axes=("x", "y"),
        points={"x": 24, "y": 24},
        train=TrainConfig(hidden=(20, 20), adam_steps=2000, lbfgs_iters=600, n_bc=100),
    )


def _wall_exact(x: FloatArray) -> FloatArray:
    return np.exp(x)


def _wall_source(x: FloatArray) -> FloatArray:
    return -np.exp(x)


def _wall_op(f: Mapping[str, Any]) -> list[Any]:
    return [-f["u_xx"] - f["f"]]


def wall_profile() -> Problem:
    """Steady temperature in a wall with a heat sink and unequal face temperatures."""
    return Problem(
        key="wall-profile",
        title="steady wall temperature, nonzero face values",
        family=ELLIPTIC,
        source="manufactured solution u = exp(x): P. J. Roache, J. Fluids Eng. 124 (2002) 4-10",
        problem={
            "equation": "-u_xx = -exp(x)",
            "space": {"x": [0.0, 1.0]},
            "boundary": "dirichlet",
            "boundary_value": "exp(x)",
        },
        operator=_wall_op,
        fields=("u_xx",),
        exact=_wall_exact,
        source_term=_wall_source,
        regularity={},
        model_keys={},
        axes=("x",),
        points={"x": 48},
        train=TrainConfig(hidden=(20, 20), adam_steps=2000, lbfgs_iters=600, n_col=500),
    )
