"""The dual (H^-1) norm of a residual in one space dimension, per time slice.

For ``F`` in ``L2(a, b)``, ``||F||_{-1} = sup {(F, phi) / ||phi_x|| : phi in H^1_0(a, b)}``.
By the Riesz representation it equals ``||psi_x||`` with ``-psi'' = F``, ``psi(a) = psi(b) = 0``;
integrating once, ``psi' = c - Q`` with ``Q(x) = int_a^x F`` and, since ``int_a^b psi' = 0``,
``c`` = the mean of ``Q``. Hence (docs/theory/advection-diffusion.md, steps H1-H3)

    ||F||_{-1}^2 = int_a^b (Q - mean Q)^2 dx,   Q(x) = int_a^x F.

``F`` is known at the Gauss-Legendre nodes of each space panel; it is replaced by its
interpolating polynomial on each panel (the same heuristic as every residual quadrature of the
service), whose antiderivative ``Q`` is a polynomial known exactly in the Legendre basis
(numpy.polynomial.legendre.legint), so the integral of ``(Q - mean Q)^2`` is exact for the
interpolant (Parseval for Legendre series: ``int_{-1}^1 P_m P_n = 2/(2m+1) delta_mn``;
Abramowitz & Stegun 22.2.10).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.polynomial import legendre
from scipy.special import roots_legendre

from boundsvc.quadrature import Component

FloatArray = np.ndarray


@lru_cache(maxsize=64)
def _coefficient_map(n: int) -> FloatArray:
    """``C`` with ``c = C @ f``: Legendre coefficients of the interpolant through ``n`` nodes."""
    z, _ = roots_legendre(n)
    return np.asarray(np.linalg.inv(legendre.legvander(z, n - 1)), dtype=np.float64)


def dual_norm_squared_1d(values: FloatArray, panels: int, length: float) -> FloatArray:
    """``||F||_{-1}^2`` per row of ``values`` (shape ``(slices, panels * n)``: ``F`` at the
    ``n`` Gauss-Legendre nodes of each of ``panels`` equal panels of ``(a, a + length)``)."""
    slices, size = values.shape
    n = size // panels
    h = length / panels
    coef = values.reshape(slices, panels, n) @ _coefficient_map(n).T  # (slices, panels, n)
    # antiderivative from the panel's left end, in the Legendre basis, in x units
    anti = legendre.legint(coef, m=1, lbnd=-1, axis=-1) * (h / 2)  # (slices, panels, n + 1)
    increments = legendre.legval(1.0, np.moveaxis(anti, -1, 0))  # (slices, panels)
    starts = np.cumsum(increments, axis=1) - increments
    anti[..., 0] += starts
    mean = np.sum(anti[..., 0], axis=1) * h / length  # int Q = sum over panels of h d_0
    anti[..., 0] -= mean[:, None]
    norms = 2.0 / (2.0 * np.arange(n + 1) + 1.0)
    return np.asarray(np.einsum("spm,m->s", np.square(anti), norms) * (h / 2), dtype=np.float64)


def dual_norm_squared(
    component: Component, values: FloatArray, n_times: int, length: float
) -> FloatArray | None:
    """Per time node, ``||F(., t_j)||_{-1}^2`` for an ``interior`` component sampled by a
    time-major Gauss-Legendre tensor rule in one space axis; None for any other layout."""
    if (
        component.rule != "gauss-legendre"
        or len(component.space_shape) != 1
        or not component.time_major
        or values.ndim != 1
        or values.size != component.size
        or n_times <= 0
        or component.size != n_times * component.space_shape[0]
    ):
        return None
    panels = component.space_panels[0]
    if component.space_shape[0] % panels:
        return None
    return dual_norm_squared_1d(values.reshape(n_times, -1), panels, length)
