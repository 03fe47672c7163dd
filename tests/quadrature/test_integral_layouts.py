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
from boundsvc.quadrature._integrals import slice_integrals, total_integral

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
    """The heuristic allowance (last Legendre coefficients of every line of nodes along each
    axis, weighted by the line's share of the weight) equals the same formula computed line
    by line on explicitly materialised per-slice tensors."""
    plan = _plan(points={"t": 6, "x": 12, "y": 7}, panels={"x": 2})
    comp = plan.components["interior"]
    f = np.random.default_rng(1).random(comp.size) ** 2
    with quadrature_log(QuadratureLog()) as log:
        upper = slice_integrals(comp, f, 6)
    estimate = _by_definition(comp, f, 6)
    shape = comp.space_shape
    w = comp.slice_weights.reshape(6, *shape)
    fs = f.reshape(6, *shape)
    volume = float(np.sum(comp.slice_weights[: int(np.prod(shape))]))
    expected = np.zeros(6)
    for s in range(6):
        for k in range(2):
            panels = comp.space_panels[k]
            n = shape[k] // panels
            x, wq = np.polynomial.legendre.leggauss(n)
            basis = np.polynomial.legendre.legvander(x, n - 1)[:, -2:]
            for j in range(shape[1 - k]):
                line = fs[s, :, j] if k == 0 else fs[s, j, :]
                share = (w[s, :, j] if k == 0 else w[s, j, :]).sum() / w[s].sum()
                for p in range(panels):
                    vals = line[p * n : (p + 1) * n]
                    coef = (vals * wq) @ basis * (2 * np.arange(n - 2, n) + 1) / 2
                    expected[s] += volume * share * 0.5 / panels * np.abs(coef).sum()
    np.testing.assert_allclose(upper - estimate, expected, rtol=1e-10)
    assert log.statements and log.statements[0].rule == "gauss-legendre"


def test_gauss_allowance_sees_aliasing_on_every_line() -> None:
    """``cos^2(2 pi x + y + 1.03)`` over ``[0, 3] x [0.25, 3.25]`` on 8 x 10 nodes: 8 nodes
    across 3 periods of ``cos(2 pi x)`` alias differently on every ``y`` line (the sum is 2.5 %
    below the exact integral, 9/2 by ``cos^2 = (1 + cos 2u)/2`` over whole periods); the mean
    over ``y`` looks smooth along ``x``, every line does not, and the per-line allowance covers
    the exact integral (a probe finding: a bound below the true error at ``t0``)."""
    problem = {
        "equation": "u_t = u_xx + u_yy",
        "space": {"x": [0.0, 3.0], "y": [0.25, 3.25]},
        "time": [0.0, 1.0],
    }
    request = PlanRequest.model_validate({"problem": problem, "points": {"t": 6, "x": 8, "y": 10}})
    plan = build_plan(derive(ProblemSpec.model_validate(problem)), plan_spec(request, "prb_x"))
    comp = plan.components["initial"]
    f = np.cos(2 * np.pi * comp.points[:, 0] + comp.points[:, 1] + 1.03) ** 2
    with quadrature_log(QuadratureLog()):
        upper = total_integral(comp, f)
    quadrature_sum = float(comp.weights @ f)
    assert quadrature_sum < 0.98 * 4.5
    assert upper >= 4.5
