"""Checks of a case's own data against its closed form, before any bound is trusted.

A bound below the true error is the worst bug only if the hypotheses hold; these checks make
sure the case's hypotheses are right: the exact solution solves the equation (residual ~ 0 at
sampled points) and every ``sup_*`` regularity value dominates the sampled quantity of the closed
form (at each time for a time-varying value). A sampled maximum is a lower estimate of the
supremum, so a pass is necessary, not sufficient; a failure is certain.
"""

from __future__ import annotations

import numpy as np

from validation.closed_form._case import ClosedFormCase, time_function

_GRID = {0: 1, 1: 201, 2: 41, 3: 13}


def sample_grid(case: ClosedFormCase, n_time: int = 41) -> tuple[np.ndarray, list[np.ndarray]]:
    """Sample times (empty if steady) and the space grid's columns (closed box)."""
    n = _GRID[len(case.axes)]
    axes = [np.linspace(lo, hi, n) for lo, hi in case.box.values()]
    cols = [g.ravel() for g in np.meshgrid(*axes, indexing="ij")] if axes else []
    time = case.time
    ts = np.array([]) if time is None else np.linspace(time[0], time[1], n_time)
    return ts, cols


def _evaluate(case: ClosedFormCase, fn, tk: float | None, cols: list[np.ndarray]) -> np.ndarray:  # type: ignore[no-untyped-def]
    n = cols[0].size if cols else 1
    args = ([] if tk is None else [np.full(n, tk)]) + cols
    return np.asarray(fn(*args), dtype=float).reshape(n, -1)


def exact_residual_max(case: ClosedFormCase) -> float:
    """max |lhs - rhs| of the exact solution over the sample grid."""
    ts, cols = sample_grid(case, n_time=11)
    fn = case.exact_residual_fn()
    times: list[float | None] = [None] if case.steady else [float(v) for v in ts]
    return max(float(np.max(np.abs(_evaluate(case, fn, tk, cols)))) for tk in times)


def regularity_violations(case: ClosedFormCase) -> list[str]:
    """Each ``sup_*`` value that a sampled value of the closed form exceeds."""
    ts, cols = sample_grid(case)
    times: list[float | None] = [None] if case.steady else [float(v) for v in ts]
    problems: list[str] = []
    entries = [(k, v, False) for k, v in case.regularity.items()]
    entries += [(k, c, True) for k, c in case.model_regularity.items()]
    for key, value, is_model in entries:
        found = case.quantity(key)
        if found is None:
            continue
        kind, fn = found
        bound = time_function(value)
        for tk in times:
            v = _evaluate(case, fn, tk, cols)
            if kind == "grad":
                q = np.linalg.norm(v, axis=1)
            elif kind == "abs":
                q = np.abs(v[:, 0])
            elif kind == "neg":
                q = np.maximum(-v[:, 0], 0.0)
            else:
                q = np.maximum(v[:, 0], 0.0)
            limit = float(bound(np.array(0.0 if tk is None else tk)))
            if float(np.max(q)) > limit * (1 + 1e-9) + 1e-12:
                what = "phi" if is_model else "u"
                problems.append(
                    f"{key}: sampled {float(np.max(q))!r} of {what} > {limit!r} at t={tk}"
                )
                break
    return problems
