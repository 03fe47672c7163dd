"""The per-slice sums take a reshape fast path on time-major plans; they must agree with
the definition ``sum_{i: t_i = t_j} w_i f_i`` on every layout, and the heuristic Gauss
allowance must equal its formula on materialised per-slice tensors. (Definitions only: no published
value is involved.)"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from api_schemas import PlanRequest, ProblemSpec
from boundsvc.certify import build_plan, derive, plan_spec
from boundsvc.quadrature import QuadratureLog, quadrature_log
from boundsvc.quadrature._integrals import slice_integrals

HEAT2D = {
    "equation": "u_t = u_xx + u_yy",
    "space": {"x": [0.0, 1.0], "y": [0.0, 2.0]},
    "time": [0.0, 1.0],
}


def _plan(**request: object):  # type: ignore[no-untyped-def]
    classified = derive(ProblemSpec.model_validate(HEAT2D))
    req = PlanRequest.model_validate({"problem": HEAT2D, **request})
    return build_plan(classified, plan_spec(req, "prb_" + "1" * 32))


def _by_definition(comp, f: np.ndarray, n_t: int) -> np.ndarray:  # type: ignore[no-untyped-def]
    out = np.zeros(n_t)
    for j in range(n_t):
        mask = comp.time_index == j
        out[j] = float(np.sum(comp.slice_weights[mask] * f[mask]))
    return out


@pytest.mark.parametrize(
    "request_",
    [
        {"points": {"t": 6, "x": 14, "y": 6}, "panels": {"x": 2}},
        {"rule": "sobol", "n": 6 * 64, "replicates": 4, "points": {"t": 6}, "seed": 3},
        {"rule": "grid", "points": {"t": 5, "x": 9, "y": 5}},
    ],
    ids=["gauss", "sobol", "grid"],
)
def test_slice_sums_match_the_definition(request_: dict) -> None:
    plan = _plan(**request_)
    comp = plan.components["interior"]
    n_t = plan.time.size
    f = np.random.default_rng(0).random(comp.size)
    np.testing.assert_allclose(slice_integrals(comp, f, n_t), _by_definition(comp, f, n_t), 1e-13)


def test_time_major_flag_does_not_survive_another_time_index() -> None:
    """Sampled plans are built by replacing a Gauss component's arrays: the fast path must
    fall back to the index sums when the time index is not the one it was set for."""
    comp = _plan(points={"t": 6, "x": 6, "y": 6}).components["interior"]
    assert comp.time_major
    reordered = comp.time_index[::-1].copy()
    other = dataclasses.replace(comp, time_index=reordered)
    assert not other.time_major
    f = np.arange(comp.size, dtype=float)
    np.testing.assert_allclose(
        slice_integrals(other, f, 6), _by_definition(other, f, 6), rtol=1e-13
    )


def test_gauss_allowance_matches_the_materialised_formula() -> None:
    """The heuristic allowance (last Legendre coefficients per axis) computed from the axis
    sums equals the same formula on explicitly materialised per-slice tensors."""
    plan = _plan(points={"t": 6, "x": 12, "y": 7}, panels={"x": 2})
    comp = plan.components["interior"]
    f = np.random.default_rng(1).random(comp.size) ** 2
    with quadrature_log(QuadratureLog()) as log:
        upper = slice_integrals(comp, f, 6)
    estimate = _by_definition(comp, f, 6)
    # reference: the formula of _statements.legendre_tail on w*f reshaped per slice
    shape = comp.space_shape
    w = comp.slice_weights.reshape(6, *shape)
    wf = w * f.reshape(6, *shape)
    volume = float(np.sum(comp.slice_weights[: int(np.prod(shape))]))
    expected = np.zeros(6)
    for k in range(2):
        other = 2 - k
        g = wf.sum(axis=other) / w.sum(axis=other) * volume
        n = shape[k] // comp.space_panels[k]
        g = g.reshape(6, comp.space_panels[k], n)
        x, wq = np.polynomial.legendre.leggauss(n)
        basis = np.polynomial.legendre.legvander(x, n - 1)[:, -2:]
        coef = (g * wq) @ basis * (2 * np.arange(n - 2, n) + 1) / 2
        expected += (0.5 / comp.space_panels[k] * np.abs(coef).sum(axis=-1)).sum(axis=1)
    np.testing.assert_allclose(upper - estimate, expected, rtol=1e-10)
    assert log.statements and log.statements[0].rule == "gauss-legendre"
