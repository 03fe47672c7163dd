"""Integrals of sampled residuals over the sets of a plan, per time node and per face."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from boundsvc.quadrature._plan import Component

FloatArray = NDArray[np.float64]


def total_integral(component: Component, integrand: FloatArray) -> float:
    """``sum_i w_i f_i``: the quadrature of ``f`` over the component's set."""
    return float(np.dot(component.weights, integrand))


def slice_integrals(component: Component, integrand: FloatArray, n_times: int) -> FloatArray:
    """Per time node ``j``: ``sum_{i: t_i = t_j} slice_weight_i f_i`` (an integral over space)."""
    if component.time_index is None or component.slice_weights is None:
        raise ValueError(f"component {component.name!r} has no time axis")
    return np.bincount(
        component.time_index, weights=component.slice_weights * integrand, minlength=n_times
    ).astype(np.float64)


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
