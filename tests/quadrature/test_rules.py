"""Quadrature rules and their error statements against outside references."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from scipy.special import roots_legendre

from api_schemas import PlanRequest, ProblemSpec
from boundsvc.certify import build_plan, derive, plan_spec
from boundsvc.quadrature import QuadratureLog, gauss_legendre, quadrature_log
from boundsvc.quadrature._integrals import slice_integrals


@pytest.mark.parametrize(
    ("n", "nodes", "weights"),
    [
        # Abramowitz & Stegun (1964), Table 25.4 (values from memory of the table, 10+ digits,
        # and cross-checked against scipy.special.roots_legendre below)
        (2, [-0.5773502691896257, 0.5773502691896257], [1.0, 1.0]),
        (3, [-0.7745966692414834, 0.0, 0.7745966692414834], [5 / 9, 8 / 9, 5 / 9]),
        (
            4,
            [-0.8611363115940526, -0.3399810435848563, 0.3399810435848563, 0.8611363115940526],
            [0.3478548451374538, 0.6521451548625461, 0.6521451548625461, 0.3478548451374538],
        ),
    ],
)
def test_gauss_legendre_matches_published_table(
    n: int, nodes: list[float], weights: list[float]
) -> None:
    x, w, edges = gauss_legendre(n, -1.0, 1.0)
    np.testing.assert_allclose(x, nodes, rtol=0, atol=1e-15)
    np.testing.assert_allclose(w, weights, rtol=0, atol=1e-15)
    ref_x, ref_w = roots_legendre(n)
    np.testing.assert_allclose(x, ref_x, atol=1e-14)
    np.testing.assert_allclose(w, ref_w, atol=1e-14)
    assert edges.tolist() == [-1.0, 1.0]


@pytest.mark.parametrize("n", [1, 2, 5, 12])
@pytest.mark.parametrize("panels", [1, 3])
def test_gauss_legendre_exact_to_degree_2n_minus_1(n: int, panels: int) -> None:
    """An n-point Gauss rule integrates x^k exactly for k <= 2n - 1 (A&S 25.4.29)."""
    a, b = -0.3, 1.7
    x, w, _ = gauss_legendre(n, a, b, panels)
    assert math.isclose(w.sum(), b - a, rel_tol=1e-14)
    for k in range(2 * n):
        exact = (b ** (k + 1) - a ** (k + 1)) / (k + 1)
        assert math.isclose(np.dot(w, x**k), exact, rel_tol=1e-12, abs_tol=1e-13)
    if panels == 1:
        k = 2 * n
        exact = (b ** (k + 1) - a ** (k + 1)) / (k + 1)
        assert not math.isclose(np.dot(w, x**k), exact, rel_tol=1e-12)


def _plan(problem: dict, **request: object):  # type: ignore[no-untyped-def]
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    req = PlanRequest.model_validate({"problem": problem, **request})
    return build_plan(classified, plan_spec(req, "prb_" + "0" * 32))


HEAT2D = {
    "equation": "u_t = u_xx + u_yy",
    "space": {"x": [0.0, 1.0], "y": [0.0, 2.0]},
    "time": [0.0, 1.0],
}


def test_sobol_plan_has_the_net_balance_property() -> None:
    """Scrambled Sobol' points of one replicate and slice form a (0, m, 2)-net in base 2:
    every elementary box of volume 2^-m holds exactly one point (Niederreiter 1992, ch. 4;
    Owen 1997 scrambling preserves it)."""
    plan = _plan(HEAT2D, rule="sobol", n=6 * 64, replicates=4, points={"t": 6})
    comp = plan.components["interior"]
    assert comp.replicates == 4 and comp.size == 4 * 6 * 64
    assert math.isclose(comp.weights.sum(), 2.0 * 1.0, rel_tol=1e-12)  # |D| x T
    sel = (comp.replicate_index == 2) & (comp.time_index == 1)
    pts = comp.points[sel][:, 1:] / np.array([1.0, 2.0])
    m = 6
    for k in range(m + 1):
        cells = np.floor(pts[:, 0] * 2**k).astype(int) * 2 ** (m - k) + np.floor(
            pts[:, 1] * 2 ** (m - k)
        ).astype(int)
        assert np.bincount(cells, minlength=2**m).tolist() == [1] * 2**m


def test_plans_are_reproducible_from_their_request() -> None:
    a = _plan(HEAT2D, rule="sobol", n=384, replicates=4, points={"t": 6})
    b = _plan(HEAT2D, rule="sobol", n=384, replicates=4, points={"t": 6})
    c = _plan(HEAT2D, rule="sobol", n=384, replicates=4, points={"t": 6}, seed=7)
    assert a.plan_id == b.plan_id and np.array_equal(
        a.components["interior"].points, b.components["interior"].points
    )
    assert c.plan_id != a.plan_id


def test_sobol_needs_a_power_of_two_per_slice() -> None:
    from boundsvc.errors import PlanInvalid

    with pytest.raises(PlanInvalid, match="power of two"):
        _plan(HEAT2D, rule="sobol", n=6 * 48, replicates=4, points={"t": 6})


@pytest.mark.parametrize("rule", ["sobol", "monte-carlo"])
def test_statistical_upper_limits_cover_at_the_stated_rate(rule: str) -> None:
    """Seeded repeated trials: the per-slice upper limit misses the true integral with a
    frequency within a binomial tolerance of the allotted failure probability."""
    f = lambda x, y: (np.sin(3 * x) * np.cos(y) + 0.3) ** 2  # noqa: E731
    # exact integral over [0,1]x[0,2] by a 60x60 Gauss rule (an outside reference: scipy nodes)
    z, w = roots_legendre(60)
    xs, ys = 0.5 * (z + 1), z + 1
    exact = float(np.einsum("i,j,ij->", 0.5 * w, w, f(xs[:, None], ys[None, :])))
    trials, misses, slices = 300, 0, 6
    confidence = 0.8
    for seed in range(trials):
        plan = _plan(
            HEAT2D, rule=rule, n=slices * 32, replicates=8, points={"t": slices}, seed=seed
        )
        comp = plan.components["interior"]
        values = f(comp.points[:, 1], comp.points[:, 2])
        log = QuadratureLog(confidence=confidence, statistical_components=1)
        with quadrature_log(log):
            upper = slice_integrals(comp, values, slices)
        misses += int(np.sum(upper < exact))
    # first statement gets half of 1 - confidence, split over the slices
    p = (1 - confidence) / 2 / slices
    observed = misses / (trials * slices)
    assert observed <= p + 3 * math.sqrt(p * (1 - p) / (trials * slices)) + 0.01


def test_gauss_heuristic_estimate_flags_an_unresolved_integrand() -> None:
    plan = _plan(
        {"equation": "u_t = u_xx", "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]},
        points={"t": 6, "x": 8},
    )
    comp = plan.components["interior"]
    x = comp.points[:, 1]
    for freq, expect_large in ((1.0, False), (40.0, True)):
        log = QuadratureLog()
        with quadrature_log(log):
            slice_integrals(comp, np.sin(freq * x) ** 2, 6)
        st = log.statements[-1]
        assert st.rigor == "heuristic"
        assert (st.allowance > 1e-3) == expect_large


def test_student_t_quantile_matches_the_printed_table() -> None:
    """The RQMC limit uses scipy.stats.t; t_{7, 0.975} = 2.365 in the usual printed tables
    (e.g. Abramowitz & Stegun 1964, Table 26.10), to the table's 3 decimals."""
    assert abs(float(stats.t.ppf(0.975, 7)) - 2.365) < 5e-4
