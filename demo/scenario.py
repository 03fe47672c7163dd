"""Demo scenario: a steel strip cooling along a process line.

The temperature deviation ``u(t, x)`` of a 1 m segment of strip between two
rollers that hold its ends at fixed temperatures obeys the heat equation

.. math::

    u_t = k\\,u_{xx}, \\qquad x \\in [0, 1],\\ t \\in [0, 0.5],\\ k = 0.4,

with inhomogeneous Dirichlet data ``u(t, 0) = 1``, ``u(t, 1) = 0.2`` and the
initial profile ``u0(x) = 1 - 0.8 x + 0.6 sin(pi x) + 0.15 sin(3 pi x)``.  The
numbers are invented for the demo.

Subtracting the steady state ``w(x) = 1 - 0.8 x`` (which satisfies the PDE and
the boundary data) leaves a homogeneous Dirichlet problem whose initial value is
a finite sine series, so separation of variables gives the exact solution

.. math::

    u(t, x) = 1 - 0.8 x + 0.6 e^{-k \\pi^2 t} \\sin(\\pi x)
              + 0.15 e^{-9 k \\pi^2 t} \\sin(3 \\pi x).

References
----------
.. [1] W. A. Strauss, *Partial Differential Equations: An Introduction*, 2nd ed.,
   Wiley, 2008, ch. 4 (separation of variables; Dirichlet condition) and
   sec. 5.6 (inhomogeneous boundary conditions).
"""

from __future__ import annotations

import copy
import math
from typing import Any

import numpy as np
import numpy.typing as npt

__all__ = [
    "AXES",
    "LEFT_VALUE",
    "MODES",
    "PROBLEM",
    "RIGHT_VALUE",
    "T_END",
    "X_DOMAIN",
    "K",
    "boundary_value",
    "exact_solution",
    "initial_value",
    "problem_dict",
    "steady_state",
]

#: Diffusivity (invented), in m^2 per unit time.
K = 0.4
#: Final time of the simulation window.
T_END = 0.5
#: The strip segment between the rollers.
X_DOMAIN = (0.0, 1.0)
#: Temperatures held by the rollers at x = 0 and x = 1.
LEFT_VALUE = 1.0
RIGHT_VALUE = 0.2
#: Sine modes ``(n, amplitude)`` of the initial deviation from the steady state.
MODES: tuple[tuple[int, float], ...] = ((1, 0.6), (3, 0.15))
#: Input order of the demo network and of the quadrature nodes.
AXES = ("t", "x")

#: The problem in the service's API wire format.
PROBLEM: dict[str, Any] = {
    "equation": "u_t = k*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": 0.4},
    "boundary": "dirichlet",
    "initial_value": "1 - 0.8*x + 0.6*sin(pi*x) + 0.15*sin(3*pi*x)",
    "boundary_value": "1 - 0.8*x",
}


def problem_dict() -> dict[str, Any]:
    """A fresh (deep) copy of :data:`PROBLEM`, safe to modify and post."""
    return copy.deepcopy(PROBLEM)


def steady_state(x: npt.ArrayLike) -> np.ndarray:
    """The steady state ``1 - 0.8 x`` (linear between the roller temperatures)."""
    xa = np.asarray(x, dtype=np.float64)
    return LEFT_VALUE + (RIGHT_VALUE - LEFT_VALUE) * xa


def initial_value(x: npt.ArrayLike) -> np.ndarray:
    """The initial profile ``u0(x) = 1 - 0.8 x + 0.6 sin(pi x) + 0.15 sin(3 pi x)``."""
    xa = np.asarray(x, dtype=np.float64)
    out = steady_state(xa)
    for n, amp in MODES:
        out = out + amp * np.sin(n * math.pi * xa)
    return out


def boundary_value(t: npt.ArrayLike, x: npt.ArrayLike) -> np.ndarray:
    """Dirichlet data as an expression in the coordinates: ``1 - 0.8 x``.

    It equals ``1`` at ``x = 0`` and ``0.2`` at ``x = 1`` for every ``t``.
    """
    ta, xa = np.broadcast_arrays(np.asarray(t, dtype=np.float64), np.asarray(x, dtype=np.float64))
    return steady_state(xa) + 0.0 * ta


def exact_solution(t: npt.ArrayLike, x: npt.ArrayLike) -> np.ndarray:
    """The separation-of-variables solution ``u(t, x)`` (broadcasting ``t`` and ``x``).

    Notes
    -----
    ``u = w(x) + sum_n b_n exp(-k n^2 pi^2 t) sin(n pi x)`` with the steady
    state ``w`` and the modes :data:`MODES` [1]_.

    References
    ----------
    .. [1] W. A. Strauss, *Partial Differential Equations: An Introduction*,
       2nd ed., Wiley, 2008, ch. 4.
    """
    ta, xa = np.broadcast_arrays(np.asarray(t, dtype=np.float64), np.asarray(x, dtype=np.float64))
    out = steady_state(xa)
    for n, amp in MODES:
        out = out + amp * np.exp(-K * (n * math.pi) ** 2 * ta) * np.sin(n * math.pi * xa)
    return out
