"""Error statements for residual integrals: confidence limits, error estimates, error terms.

Only squared residual norms of the ``interior`` and ``initial`` components get an allowance:
every energy estimate adds them with a positive coefficient, so an upper limit of each keeps the
bound valid. What each integral used is recorded in the active ``QuadratureLog`` and reported in
the certificate.

- ``sobol``: per time slice, the ``R`` replicate estimates give a Student-t upper limit
  ``mean + t_{R-1, 1-delta} s / sqrt(R)`` (Owen 1997; L'Ecuyer et al. 2010 on normality: the
  statement is *statistical*).
- ``monte-carlo``: per slice a CLT limit ``mean + z_{1-delta} sd / sqrt(n)`` and, when the client
  bounds the residual (``|r| <= B``), Hoeffding's finite-sample limit
  ``mean + |D| B^2 sqrt(log(1/delta) / (2 n))`` (Hoeffding, JASA 58 (1963) 13-30), each at half
  the level; the smaller is used.
- ``gauss-legendre``: a heuristic estimate from the decay of the discrete Legendre coefficients
  of the samples along each axis (the last two coefficients), or, when the client bounds the
  ``2n``-th derivative of the integrand along every axis, the classical error term
  ``(b-a) h^{2n} (n!)^4 / ((2n+1) ((2n)!)^3) M`` per axis (Abramowitz & Stegun 25.4.30; Davis &
  Rabinowitz 1984), summed over axes and multiplied by the other axes' measure.
- ``grid-trapezoid`` / ``grid-simpson``: a heuristic Richardson estimate against the rule on every
  second node, ``|Q_h - Q_2h| / 3`` (trapezoid) or ``/ 15`` (Simpson), when the counts allow.
- ``custom``: no error term (a warning says so).

Failure probabilities of all statistical statements are added (union bound) and stated.
"""

from __future__ import annotations

import contextvars
import functools
import math
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

FloatArray = NDArray[np.float64]

DEFAULT_CONFIDENCE = 0.95


@dataclass
class QuadratureStatement:
    """What one residual integral used."""

    component: str
    rule: str
    rigor: str
    method: str
    failure_probability: float = 0.0
    allowance: float = 0.0
    estimate: float = 0.0


@dataclass
class QuadratureLog:
    """Settings and the statements made while one certificate is computed."""

    confidence: float = DEFAULT_CONFIDENCE
    derivative_bounds: Mapping[str, Mapping[str, float]] = field(default_factory=dict)
    residual_bounds: Mapping[str, float] = field(default_factory=dict)
    statistical_components: int = 1
    statements: list[QuadratureStatement] = field(default_factory=list)
    _calls: dict[str, int] = field(default_factory=dict)

    def next_delta(self, component: str) -> float:
        """Failure probability for the next statement on ``component`` (geometric split, so
        the total over any number of calls stays within this component's share)."""
        k = self._calls.get(component, 0) + 1
        self._calls[component] = k
        share = (1.0 - self.confidence) / max(self.statistical_components, 1)
        return share / 2.0**k

    @property
    def total_failure_probability(self) -> float:
        return float(sum(s.failure_probability for s in self.statements))

    @property
    def weakest_rigor(self) -> str:
        order = {"proven": 0, "assumed": 1, "statistical": 2, "heuristic": 3}
        return max((s.rigor for s in self.statements), key=lambda r: order[r], default="proven")


_ACTIVE: contextvars.ContextVar[QuadratureLog | None] = contextvars.ContextVar(
    "boundsvc_quadrature_log", default=None
)


@contextmanager
def quadrature_log(log: QuadratureLog) -> Iterator[QuadratureLog]:
    """Make ``log`` the active log while a certificate is computed."""
    token = _ACTIVE.set(log)
    try:
        yield log
    finally:
        _ACTIVE.reset(token)


def active_log() -> QuadratureLog | None:
    return _ACTIVE.get()


def _gl_constant(n: int) -> float:
    # (n!)^4 / ((2n+1) ((2n)!)^3), in logs to avoid overflow
    lg = 4 * math.lgamma(n + 1) - math.log(2 * n + 1) - 3 * math.lgamma(2 * n + 1)
    return math.exp(lg)


def legendre_tail(values: FloatArray, n: int, length: float) -> FloatArray:
    """Heuristic error estimate of an ``n``-point Gauss rule along the last axis.

    ``values`` has shape ``(..., n)`` on Gauss-Legendre nodes; the discrete Legendre coefficients
    ``c_k = (2k+1)/2 sum_i w_i f_i P_k(x_i)`` are exact for degree < n; the estimate is
    ``length/2 * (|c_{n-1}| + |c_{n-2}|)``.
    """
    if n < 3:
        return np.abs(values).sum(axis=-1) * length / max(n, 1)
    coef = values @ _tail_basis(n)
    return np.asarray(0.5 * length * np.abs(coef).sum(axis=-1), dtype=np.float64)


@functools.lru_cache(maxsize=64)
def _tail_basis(n: int) -> FloatArray:
    """``w_i P_k(x_i) (2k+1)/2`` for ``k = n-2, n-1`` on the ``n`` Gauss-Legendre nodes, shape
    ``(n, 2)``: the last two discrete Legendre coefficients are ``values @ this``. Cached per
    ``n``: ``leggauss`` solves an eigenproblem (about 0.2 s at n = 250)."""
    x, w = np.polynomial.legendre.leggauss(n)
    basis = np.polynomial.legendre.legvander(x, n - 1)[:, -2:]  # (n, 2): P_k(x_i)
    out = w[:, None] * basis * ((2 * np.arange(n - 2, n) + 1) / 2)[None, :]
    out.setflags(write=False)
    return np.asarray(out, dtype=np.float64)
