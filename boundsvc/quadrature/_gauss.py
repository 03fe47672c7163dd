"""Composite Gauss-Legendre rules on an interval.

References
----------
.. [1] M. Abramowitz, I. A. Stegun, "Handbook of Mathematical Functions", 1964, 25.4.29-25.4.30
   and Table 25.4 (nodes and weights on [-1, 1]).
"""

from __future__ import annotations

import functools

import numpy as np
from numpy.typing import NDArray

MAX_NODES = 4096


@functools.lru_cache(maxsize=64)
def _reference_rule(n: int) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    nodes, weights = np.polynomial.legendre.leggauss(n)
    nodes.setflags(write=False)
    weights.setflags(write=False)
    return nodes, weights


def gauss_legendre(
    n: int, low: float, high: float, panels: int = 1
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Composite ``n``-point Gauss-Legendre rule on ``[low, high]`` with equal panels.

    Returns ``(nodes, weights, edges)``: ``panels * n`` increasing nodes, their positive weights
    (summing to ``high - low``), and the ``panels + 1`` panel edges. Exact for polynomials of
    degree ``2n - 1`` on each panel ([1] 25.4.29).
    """
    if n < 1 or panels < 1:
        raise ValueError("a Gauss-Legendre rule needs n >= 1 nodes and panels >= 1")
    if n * panels > MAX_NODES:
        raise ValueError(f"at most {MAX_NODES} nodes per axis, got {n * panels}")
    ref_nodes, ref_weights = _reference_rule(n)
    edges = np.linspace(low, high, panels + 1)
    half = 0.5 * np.diff(edges)
    mid = 0.5 * (edges[:-1] + edges[1:])
    nodes = (mid[:, None] + half[:, None] * ref_nodes[None, :]).ravel()
    weights = (half[:, None] * ref_weights[None, :]).ravel()
    return nodes, weights, edges
