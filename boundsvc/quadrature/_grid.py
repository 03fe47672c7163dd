"""Uniform grids with trapezoid or Simpson weights (for clients that already have grid data).

References
----------
.. [1] P. J. Davis, P. Rabinowitz, "Methods of Numerical Integration", 2nd ed., Academic
   Press 1984, sec. 2.1 (composite trapezoid and Simpson rules, error terms).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

FloatArray = NDArray[np.float64]


def trapezoid_rule(
    n: int, low: float, high: float, panels: int = 1
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """``n`` equally spaced nodes including both ends, composite trapezoid weights."""
    del panels
    if n < 2:
        raise ValueError("a trapezoid grid needs at least 2 nodes per axis")
    nodes = np.linspace(low, high, n)
    h = (high - low) / (n - 1)
    weights = np.full(n, h)
    weights[0] = weights[-1] = h / 2
    return nodes, weights, np.array([low, high])


def simpson_rule(
    n: int, low: float, high: float, panels: int = 1
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """``n`` (odd) equally spaced nodes including both ends, composite Simpson weights."""
    del panels
    if n < 3 or n % 2 == 0:
        raise ValueError("a Simpson grid needs an odd number (>= 3) of nodes per axis")
    nodes = np.linspace(low, high, n)
    h = (high - low) / (n - 1)
    weights = np.full(n, 2.0)
    weights[1::2] = 4.0
    weights[0] = weights[-1] = 1.0
    return nodes, weights * h / 3, np.array([low, high])
