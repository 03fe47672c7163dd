"""Integrals of sampled residuals over the sets of a plan, per time node and per face.

Squared residual norms of the ``interior`` and ``initial`` components come back as *upper
limits* (estimate + allowance) whenever a certificate's quadrature log is active; see
``_statements.py`` for what each rule's allowance is and how it is stated.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray
from scipy import stats

from boundsvc.quadrature._plan import Component
from boundsvc.quadrature._statements import (
    QuadratureLog,
    QuadratureStatement,
    _gl_constant,
    _tail_basis,
    active_log,
)

FloatArray = NDArray[np.float64]
_LIMITED = ("interior", "initial")


def total_integral(component: Component, integrand: FloatArray) -> float:
    """``sum_i w_i f_i`` over the component's set (an upper limit for residual norms)."""
    estimate = float(np.dot(component.weights, integrand))
    if component.time_index is None and component.name in _LIMITED:
        slices = np.zeros(component.size, dtype=np.int64)
        limit = _limit(component, integrand, slices, component.weights, np.array([estimate]))
        return float(limit[0])
    return estimate


def slice_integrals(component: Component, integrand: FloatArray, n_times: int) -> FloatArray:
    """Per time node ``j``: ``sum_{i: t_i = t_j} slice_weight_i f_i`` (an integral over space);
    an upper limit for the squared residual norms of ``interior``/``initial``."""
    if component.time_index is None or component.slice_weights is None:
        raise ValueError(f"component {component.name!r} has no time axis")
    per = _per_slice(component, integrand, n_times)
    if per is not None:
        # contiguous slices: one fused multiply-add pass, no temporary of the plan's size
        estimate = np.einsum(
            "ij,ij->i",
            component.slice_weights.reshape(n_times, per),
            integrand.reshape(n_times, per),
        )
    else:
        estimate = np.bincount(
            component.time_index, weights=component.slice_weights * integrand, minlength=n_times
        ).astype(np.float64)
    if component.name in _LIMITED:
        return _limit(component, integrand, component.time_index, component.slice_weights, estimate)
    return estimate


def _per_slice(component: Component, integrand: FloatArray, n_times: int) -> int | None:
    """Points per time slice when the component is time-major and ``integrand`` is one value
    per point (else None: the general index-based sums are used)."""
    if not component.time_major or integrand.ndim != 1 or n_times <= 0:
        return None
    per, rest = divmod(component.size, n_times)
    if rest or integrand.size != component.size:
        return None
    return per


def face_slice_integrals(component: Component, integrand: FloatArray, n_times: int) -> FloatArray:
    """Per face and time node: the integral of ``f`` over that face at that time, shape
    ``(n_faces, n_times)`` (in one space dimension a face is a point: the value itself)."""
    if (
        component.time_index is None
        or component.slice_weights is None
        or component.face_index is None
    ):
        raise ValueError(f"component {component.name!r} has no faces or no time axis")
    n_faces = len(component.faces)
    index = component.face_index * n_times + component.time_index
    sums = np.bincount(
        index, weights=component.slice_weights * integrand, minlength=n_faces * n_times
    )
    return sums.reshape(n_faces, n_times).astype(np.float64)


def squared_values(values: FloatArray) -> FloatArray:
    """``|r|^2`` per point; for systems (points x equations) the squared Euclidean norm."""
    if values.ndim == 1:
        return np.square(values)
    return np.einsum("ij,ij->i", values, values)


# -- allowances --------------------------------------------------------------------------
def _limit(
    component: Component,
    f: FloatArray,
    slices: NDArray[np.int64],
    slice_weights: FloatArray,
    estimate: FloatArray,
) -> FloatArray:
    log = active_log()
    # ``min`` is a reduction (no boolean temporary); a NaN minimum also refuses, like before
    if log is None or (f.size and not float(np.min(f)) >= 0.0):
        return estimate
    rule = component.rule
    if rule == "sobol":
        allowance, delta, method = _sobol(component, f, slices, slice_weights, estimate, log)
        rigor = "statistical"
    elif rule == "monte-carlo":
        allowance, delta, method = _monte_carlo(component, f, slices, slice_weights, log)
        rigor = "statistical"
    elif rule == "gauss-legendre":
        allowance, rigor, method = _gauss(component, f, slice_weights, estimate.size, log)
        delta = 0.0
    elif rule in ("grid-trapezoid", "grid-simpson"):
        allowance, method = _grid(component, f, slice_weights, estimate.size)
        rigor, delta = "heuristic", 0.0
    else:
        allowance, rigor, delta = np.zeros_like(estimate), "heuristic", 0.0
        method = "client points and weights: no quadrature error term"
    log.statements.append(
        QuadratureStatement(
            component=component.name,
            rule=rule,
            rigor=rigor,
            method=method,
            failure_probability=delta,
            allowance=float(np.max(allowance, initial=0.0)),
            estimate=float(np.max(estimate, initial=0.0)),
        )
    )
    return estimate + allowance


def _replicate_slices(
    component: Component,
    f: FloatArray,
    slices: NDArray[np.int64],
    slice_weights: FloatArray,
    n_slices: int,
) -> FloatArray:
    assert component.replicate_index is not None
    r = component.replicates
    index = slices * r + component.replicate_index
    sums = np.bincount(index, weights=slice_weights * f * r, minlength=n_slices * r)
    return np.asarray(sums, dtype=np.float64).reshape(n_slices, r)


def _sobol(
    component: Component,
    f: FloatArray,
    slices: NDArray[np.int64],
    slice_weights: FloatArray,
    estimate: FloatArray,
    log: QuadratureLog,
) -> tuple[FloatArray, float, str]:
    n_slices = estimate.size
    per = _replicate_slices(component, f, slices, slice_weights, n_slices)
    r = per.shape[1]
    delta = log.next_delta(component.name)
    quantile = float(stats.t.ppf(1.0 - delta / n_slices, r - 1))
    spread = per.std(axis=1, ddof=1) / math.sqrt(r)
    return (
        quantile * spread,
        delta,
        f"Student-t upper limit over {r} scrambled Sobol' replicates per time slice "
        f"(t = {quantile:.3g}, union over {n_slices} slices, failure probability "
        f"{delta:.3g})",
    )


def _monte_carlo(
    component: Component,
    f: FloatArray,
    slices: NDArray[np.int64],
    slice_weights: FloatArray,
    log: QuadratureLog,
) -> tuple[FloatArray, float, str]:
    n_slices = int(slices.max()) + 1 if slices.size else 1
    counts = np.bincount(slices, minlength=n_slices).astype(np.float64)
    volume = float(np.bincount(slices, weights=slice_weights, minlength=n_slices)[0])
    y = volume * f
    mean = np.bincount(slices, weights=y, minlength=n_slices) / counts
    sq = np.bincount(slices, weights=y * y, minlength=n_slices) / counts
    var = np.maximum(sq - mean * mean, 0.0) * counts / np.maximum(counts - 1, 1)
    delta = log.next_delta(component.name)
    bound = log.residual_bounds.get(component.name)
    per = delta / n_slices
    if bound is None:
        z = float(stats.norm.ppf(1.0 - per))
        return (
            z * np.sqrt(var / counts),
            delta,
            f"CLT upper limit (z = {z:.3g}, asymptotic) per time slice, union over "
            f"{n_slices} slices, failure probability {delta:.3g}",
        )
    z = float(stats.norm.ppf(1.0 - per / 2))
    clt = z * np.sqrt(var / counts)
    hoeffding = volume * bound**2 * np.sqrt(math.log(2.0 / per) / (2 * counts))
    return (
        np.minimum(clt, hoeffding),
        delta,
        f"min of CLT and Hoeffding limits (|r| <= {bound:g}, each at half the level) per "
        f"time slice, union over {n_slices} slices, failure probability {delta:.3g}",
    )


def _gauss(
    component: Component,
    f: FloatArray,
    slice_weights: FloatArray,
    n_slices: int,
    log: QuadratureLog,
) -> tuple[FloatArray, str, str]:
    shape = component.space_shape
    panels = component.space_panels
    if not shape or int(np.prod(shape)) * n_slices != f.size:
        return np.zeros(n_slices), "heuristic", "no error estimate for this layout"
    bounds = log.derivative_bounds.get(component.name)
    volume = float(np.sum(slice_weights[: int(np.prod(shape))]))
    if bounds is not None and all(a in bounds for a in component.axes if a != "t"):
        space_axes = [a for a in component.axes if a != "t"]
        err = 0.0
        for k, axis in enumerate(space_axes):
            n = shape[k] // panels[k]
            h = component.space_lengths[k] / panels[k]
            err += volume * _gl_constant(n) * h ** (2 * n) * float(bounds[axis])
        return (
            np.full(n_slices, err),
            "assumed",
            "classical Gauss-Legendre error term with the client's bounds on the 2n-th "
            "derivatives of the squared residual (Abramowitz & Stegun 25.4.30)",
        )
    return (
        _line_tails(slice_weights, f, n_slices, shape, panels, volume),
        "heuristic",
        "heuristic: decay of the last two discrete Legendre coefficients on every line of "
        "nodes along each axis",
    )


def _line_tails(
    slice_weights: FloatArray,
    f: FloatArray,
    n_slices: int,
    shape: tuple[int, ...],
    panels: tuple[int, ...],
    volume: float,
) -> FloatArray:
    """Per slice: the Legendre-tail estimate (``legendre_tail``) of every line of nodes along
    every space axis, each line weighted by its share of the slice's quadrature weight.

    Per line, not on the weighted mean over the other axes: a residual that the nodes do not
    resolve along ``x`` can alias differently on every ``y`` line, and the average over ``y``
    then looks smooth along ``x`` while every line is off (a randomized probe found a bound
    below the true error that way: ``cos(2 pi x + y)`` on 8 nodes across 3 periods). By the
    triangle inequality the weighted sum of the lines' estimates is at least the estimate of
    the mean. ``einsum`` contracts the nodes of each panel in place (no copy of ``f``); the
    coefficient arrays are ``2/n`` of the plan's size.
    """
    w = slice_weights.reshape(n_slices, *shape)
    values = f.reshape(n_slices, *shape)
    letters = "abc"[: len(shape)]
    total = np.zeros(n_slices)
    for k in range(len(shape)):
        n = shape[k] // panels[k]
        # Gauss-Legendre plans have at least MIN_GAUSS_NODES (6) nodes per panel
        assert n >= 3, "the Legendre tail needs at least 3 nodes per panel"
        split = values.reshape(n_slices, *shape[:k], panels[k], n, *shape[k + 1 :])
        inner = "".join("pi" if j == k else letters[j] for j in range(len(shape)))
        outer = "".join("p" if j == k else letters[j] for j in range(len(shape)))
        coef = np.einsum(f"t{inner},iq->t{outer}q", split, _tail_basis(n))
        lines = 0.5 / panels[k] * np.abs(coef).sum(axis=-1).sum(axis=k + 1)
        line_weights = w.sum(axis=k + 1)
        shares = line_weights / line_weights.reshape(n_slices, -1).sum(axis=1).reshape(
            (n_slices,) + (1,) * (len(shape) - 1)
        )
        total += volume * (shares * lines).reshape(n_slices, -1).sum(axis=1)
    return total


def _grid(
    component: Component, f: FloatArray, slice_weights: FloatArray, n_slices: int
) -> tuple[FloatArray, str]:
    shape = component.space_shape
    if not shape or int(np.prod(shape)) * n_slices != f.size:
        return np.zeros(n_slices), "no error estimate for this layout"
    simpson = component.rule == "grid-simpson"
    wf = (slice_weights * f).reshape(n_slices, *shape)
    w = slice_weights.reshape(n_slices, *shape)
    total = np.zeros(n_slices)
    for k, n in enumerate(shape):
        if n < (5 if simpson else 3) or (n - 1) % (4 if simpson else 2):
            return np.zeros(n_slices), "no Richardson estimate (node counts do not nest)"
        others = tuple(i + 1 for i in range(len(shape)) if i != k)
        marginal = w.sum(axis=others) if others else w
        omega = marginal / marginal.sum(axis=1, keepdims=True)  # 1-D weights, total 1
        profile = (wf.sum(axis=others) if others else wf) / omega
        fine = (omega * profile).sum(axis=1)
        coarse = (profile[:, ::2] * _coarse_weights(n, simpson)).sum(axis=1)
        total += np.abs(fine - coarse) / (15.0 if simpson else 3.0)
    return total, "heuristic: Richardson estimate against the rule on every second node"


def _coarse_weights(n: int, simpson: bool) -> FloatArray:
    m = (n - 1) // 2 + 1
    if simpson:
        w = np.full(m, 2.0)
        w[1::2] = 4.0
        w[0] = w[-1] = 1.0
        return w / (3 * (m - 1))
    w = np.ones(m)
    w[0] = w[-1] = 0.5
    return w / (m - 1)
