"""True errors by an independent fine tensor Gauss-Legendre rule (scipy's nodes).

The error field is given as a numpy callable; nothing here comes from the service. For an ODE
system the "space" is a single point of weight 1, so the same code gives the Euclidean norm at
each time; for a steady problem there is no time integral.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
from scipy.special import roots_legendre

#: ``fn(t, *space_columns)`` (``fn(*space_columns)`` when steady) -> values, shape (n,) or (n, m)
ErrorField = Callable[..., np.ndarray]

#: Gauss-Legendre nodes per space axis for 1, 2, 3 axes (0: an ODE system)
SPACE_NODES = {0: 1, 1: 200, 2: 60, 3: 16}
#: Gauss-Legendre nodes in time, by the number of space axes: 3-D is kept cheap (its cases'
#: perturbations are low-degree trigonometric polynomials, which 48 x 16^3 nodes integrate to
#: rounding: the same norms as 200 x 24^3 to 1e-15 relative for navier_stokes.py's ABC case)
TIME_NODES = {0: 200, 1: 200, 2: 200, 3: 48}


def gauss_legendre(n: int, lo: float, hi: float) -> tuple[np.ndarray, np.ndarray]:
    """n-point Gauss-Legendre nodes and weights on [lo, hi]."""
    z, w = roots_legendre(n)
    return 0.5 * (hi - lo) * (z + 1.0) + lo, 0.5 * (hi - lo) * w


@dataclass(frozen=True)
class TrueError:
    """L2 norms of the error: over space-time, at the final time, and at any time ``at(t)``.

    Steady problems: ``space_time`` and ``final_time`` are ``nan``, ``l2_space`` is set.
    """

    space_time: float
    final_time: float
    at: Callable[[float], float]
    l2_space: float = float("nan")


class SpaceRule:
    """A tensor Gauss-Legendre rule on the space box (one point of weight 1 if no axes)."""

    def __init__(self, box: Mapping[str, tuple[float, float]], n: int | None = None) -> None:
        n = SPACE_NODES[len(box)] if n is None else n
        rules = [gauss_legendre(n, lo, hi) for lo, hi in box.values()]
        if rules:
            grids = np.meshgrid(*[r[0] for r in rules], indexing="ij")
            wgrids = np.meshgrid(*[r[1] for r in rules], indexing="ij")
            self.columns = [g.ravel() for g in grids]
            self.weights = np.prod([w.ravel() for w in wgrids], axis=0)
        else:
            self.columns, self.weights = [], np.ones(1)

    def l2(self, field: ErrorField, *time: float) -> float:
        """(sum of w |field|^2)^(1/2) at a fixed time (or steady with no time)."""
        cols = [np.full(self.weights.size, tk) for tk in time] + self.columns
        values = np.asarray(field(*cols), dtype=float).reshape(self.weights.size, -1)
        return float(np.sqrt(np.dot(self.weights, np.sum(values**2, axis=1))))


def true_error(
    field: ErrorField,
    time: tuple[float, float] | None,
    box: Mapping[str, tuple[float, float]],
    n_time: int | None = None,
    n_space: int | None = None,
) -> TrueError:
    """The error norms of ``field`` by a fine tensor Gauss-Legendre rule (``TIME_NODES`` and
    ``SPACE_NODES`` by the number of space axes unless given)."""
    space = SpaceRule(box, n_space)
    n_time = TIME_NODES[len(box)] if n_time is None else n_time
    if time is None:
        value = space.l2(field)
        return TrueError(float("nan"), float("nan"), lambda tk: value, l2_space=value)
    ts, wt = gauss_legendre(n_time, *time)
    squares = np.array([space.l2(field, tk) ** 2 for tk in ts])
    return TrueError(
        space_time=float(np.sqrt(np.dot(wt, squares))),
        final_time=space.l2(field, time[1]),
        at=lambda tk: space.l2(field, tk),
    )
