"""The log-space Gronwall propagation against an external reference.

Reference: ``scipy.integrate.solve_ivp`` of the linear ODE ``Y' = a(t) Y + g(t)`` (the equality
case of Gronwall's differential inequality, whose solution is exactly the variation-of-constants
bound: Gronwall, Ann. Math. 20 (1919); Evans, PDE, 2nd ed. 2010, App. B.2 (j)) and
``scipy.integrate.quad`` of the rate. The forcings are polynomials of degree < nodes per panel,
so the panel interpolant the service uses is exact between the nodes and the bound must equal
the ODE solution up to the guard on the panels' end segments (never below it).
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp
from scipy.interpolate import BarycentricInterpolator

from boundsvc.gronwall import Rate, _PanelInterpolant, propagate
from boundsvc.quadrature import TimeGrid


def gauss_grid(t0: float, t1: float, panels: int, n: int) -> TimeGrid:
    x, w = np.polynomial.legendre.leggauss(n)
    edges = np.linspace(t0, t1, panels + 1)
    nodes = np.concatenate(
        [0.5 * (a + b) + 0.5 * (b - a) * x for a, b in itertools.pairwise(edges)]
    )
    weights = np.concatenate([0.5 * (b - a) * w for a, b in itertools.pairwise(edges)])
    return TimeGrid(edges=edges, nodes=nodes, weights=weights, nodes_per_panel=n)


def reference(rate, forcing, y0: float, times: np.ndarray) -> np.ndarray:  # type: ignore[no-untyped-def]
    sol = solve_ivp(
        lambda t, y: rate(t) * y + forcing(t),
        (float(times[0]), float(times[-1])),
        [y0],
        t_eval=times,
        rtol=1e-12,
        atol=1e-300,
        method="DOP853",
    )
    assert sol.success
    return np.asarray(sol.y[0])


def assert_matches(log_y: np.ndarray, exact: np.ndarray) -> None:
    bound = np.exp(log_y)
    # never below the exact solution (beyond the reference's own tolerance), and tight: the
    # panel polynomial is exact for these forcings except on the end segments of each panel
    # (edge to first node, last node to edge), where it is raised to the nearest node's value
    # (test_end_segments_are_guarded_against_extrapolation); that costs < 2e-4 relative once
    # the bound has grown to a tenth of its largest value
    assert np.all(bound >= exact * (1 - 1e-9)), np.min(bound / exact)
    grown = exact >= 0.1 * np.max(exact)
    np.testing.assert_allclose(bound[grown], exact[grown], rtol=2e-4)


def test_constant_rate_matches_closed_form_and_ode() -> None:
    """Y' = 2Y + 1, Y(0) = 1: Y = 1.5 e^{2t} - 0.5 (any ODE text, e.g. Boyce & DiPrima,
    Elementary Differential Equations, ch. 2.1)."""
    grid = gauss_grid(0.0, 1.0, 3, 6)
    prop = propagate(grid, Rate(constant=2.0), 1.0, {"g": np.ones(grid.size)})
    closed = 1.5 * np.exp(2.0 * prop.times) - 0.5
    assert_matches(prop.log_y, closed)
    assert_matches(prop.log_y, reference(lambda t: 2.0, lambda t: 1.0, 1.0, prop.times))
    assert prop.ended_by is None


@pytest.mark.parametrize("big", [1.0, 60.0, 400.0])
def test_time_varying_rate_matches_ode(big: float) -> None:
    """a(t) = big * (1 + sin 3t) + 1/(1.25 - t): many pieces per step when ``big`` is large
    (at 400 the rate integral is about 560, some 70 pieces of exponent 8)."""

    def a(t):  # type: ignore[no-untyped-def]
        return big * (1.0 + np.sin(3.0 * t)) + 1.0 / (1.25 - t)

    grid = gauss_grid(0.0, 1.0, 4, 5)
    g = 0.5 + grid.nodes**2  # degree 2 < 5 nodes: the interpolant is exact
    prop = propagate(grid, Rate(function=a), 0.25, {"g": g})
    assert prop.ended_by is None
    exact = reference(a, lambda t: 0.5 + t * t, 0.25, prop.times)
    assert_matches(prop.log_y, exact)
    # the rate integral itself against quad (rounded up, never down)
    whole = float(Rate(function=a).integral(np.array([0.0]), np.array([1.0]))[0])
    ref, _ = quad(a, 0.0, 1.0, epsabs=1e-13, epsrel=1e-13)
    assert whole >= ref - 1e-12 and whole == pytest.approx(ref, rel=1e-11)
    # shares add up to one
    total = sum(prop.shares[name][-1] for name in ("initial", "g"))
    assert total == pytest.approx(1.0, rel=1e-12)


def test_strongly_damped_rate_matches_ode() -> None:
    """a(t) = -400 (1 + sin 3t) + 1/(1.25 - t): the bound follows the quasi-steady solution
    ``Y ~ g/|a|``; never below the ODE solution, and within the end-segment guard's cost."""

    def a(t):  # type: ignore[no-untyped-def]
        return -400.0 * (1.0 + np.sin(3.0 * t)) + 1.0 / (1.25 - t)

    grid = gauss_grid(0.0, 1.0, 4, 5)
    prop = propagate(grid, Rate(function=a), 0.25, {"g": 0.5 + grid.nodes**2})
    assert prop.ended_by is None
    exact = reference(a, lambda t: 0.5 + t * t, 0.25, prop.times)
    ratio = np.exp(prop.log_y) / exact
    assert np.all(ratio >= 1 - 1e-9), np.min(ratio)
    assert np.all(ratio[prop.node_mask] <= 1.01), np.max(ratio)


@pytest.mark.parametrize("seed", range(4))
def test_panel_polynomial_matches_scipy_barycentric(seed: int) -> None:
    """Between its first and last node the panel interpolant is the interpolating polynomial:
    on a panel's Gauss-Legendre nodes it agrees with ``scipy.interpolate.BarycentricInterpolator``
    (the second barycentric formula, Berrut & Trefethen, SIAM Review 46 (2004), eq. 4.2), is
    exact at the nodes and on polynomials of lower degree, and is deterministic (scipy's
    weights are multiplied in a random order, so two of its instances can differ)."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(4, 17))
    lo = float(rng.uniform(-2.0, 2.0))
    hi = lo + float(rng.uniform(1e-3, 3.0))
    x, _ = np.polynomial.legendre.leggauss(n)
    nodes = 0.5 * (lo + hi) + 0.5 * (hi - lo) * x
    values = rng.normal(size=(n, 3))
    inside = np.concatenate([rng.uniform(nodes[0], nodes[-1], 500), nodes, nodes[::3]])
    ours = _PanelInterpolant(nodes, values)(inside)
    reference_values = BarycentricInterpolator(nodes, values)(inside)
    scale = float(np.max(np.abs(reference_values)))
    np.testing.assert_allclose(ours, reference_values, rtol=0, atol=1e-12 * scale)
    np.testing.assert_array_equal(ours[500 : 500 + n], values)
    np.testing.assert_array_equal(_PanelInterpolant(nodes, values)(inside), ours)
    cubic = 1.0 - 2.0 * nodes + 0.5 * nodes**3
    exact = (1.0 - 2.0 * inside + 0.5 * inside**3)[:, None]
    got = _PanelInterpolant(nodes, cubic[:, None])(inside)
    np.testing.assert_allclose(got, exact, rtol=0, atol=1e-12 * float(np.max(np.abs(exact))))


def test_panel_polynomial_with_many_nodes_stays_finite() -> None:
    """2,000 Gauss-Legendre nodes on one panel: the weights' products would leave float64 if
    multiplied in node order; the interpolant of a smooth function is still accurate
    (exp(x) against numpy, common practice for a well-conditioned node set)."""
    x, _ = np.polynomial.legendre.leggauss(2000)
    nodes = 3.0 + 0.5 * x
    interp = _PanelInterpolant(nodes, np.exp(nodes)[:, None])
    assert np.all(np.isfinite(interp.weights)) and np.all(interp.weights != 0)
    points = np.linspace(nodes[0], nodes[-1], 301)
    np.testing.assert_allclose(interp(points)[:, 0], np.exp(points), rtol=1e-11)


def test_rate_with_pole_is_vacuous_after_the_pole_and_exact_before() -> None:
    """a(t) = 1/(1.5 - t) has a pole at 1.5 inside [0, 2]; Y' = aY, Y(0) = 1 gives
    Y = 1.5/(1.5 - t) before it."""

    def a(t):  # type: ignore[no-untyped-def]
        return 1.0 / (1.5 - t)

    grid = gauss_grid(0.0, 2.0, 4, 4)
    prop = propagate(grid, Rate(function=a, poles=(1.5,)), 1.0, {"g": np.zeros(grid.size)})
    assert prop.ended_by == "rate-pole" and prop.ended_at == 1.5
    assert prop.finite_until is not None and prop.finite_until < 1.5
    before = prop.times < 1.5
    assert np.all(np.isnan(prop.log_y[~before]))
    assert math.isinf(prop.log_space_time)
    assert_matches(prop.log_y[before], 1.5 / (1.5 - prop.times[before]))


def test_forcing_with_zeros() -> None:
    """Zero initial value and a forcing that is zero on the first panels: the bound is exactly
    zero until the forcing starts, then the ODE solution."""
    grid = gauss_grid(0.0, 2.0, 4, 4)
    g = np.where(grid.nodes > 1.0, (grid.nodes - 1.0) ** 2, 0.0)  # per-panel polynomial
    prop = propagate(grid, Rate(constant=-0.5), 0.0, {"g": g, "h": np.zeros(grid.size)})
    assert np.all(prop.log_y[prop.times <= 1.0] == -math.inf)
    late = prop.times > 1.0
    # variation of constants by quad: Y(t) = int_1^t e^{-(t - s)/2} (s - 1)^2 ds
    exact = np.array(
        [
            quad(
                lambda r, tk=tk: math.exp(-0.5 * (tk - r)) * (r - 1.0) ** 2,
                1.0,
                tk,
                epsabs=0,
                epsrel=1e-13,
            )[0]
            for tk in prop.times[late]
        ]
    )
    # the forcing rises from 0 at a panel edge: the end-segment guard (value of the first node
    # on [edge, first node]) costs most here, about 1.4 % once the bound has grown
    bound = np.exp(prop.log_y[late])
    assert np.all(bound >= exact * (1 - 1e-9))
    np.testing.assert_allclose(bound[-1], exact[-1], rtol=2e-2)
    assert prop.shares["h"][-1] == 0.0 and prop.shares["g"][-1] == pytest.approx(1.0)
    # everything zero: the bound is zero everywhere, the initial value carries the share
    zero = propagate(grid, Rate(constant=3.0), 0.0, {"g": np.zeros(grid.size)})
    assert np.all(zero.log_y == -math.inf) and zero.log_space_time == -math.inf
    assert zero.shares["initial"][-1] == 1.0


def test_overflow_is_vacuous_not_inf() -> None:
    """A rate so large that the bound leaves float64: ended by overflow, never ``inf``."""
    grid = gauss_grid(0.0, 1.0, 2, 4)
    prop = propagate(grid, Rate(constant=1500.0), 1.0, {"g": np.ones(grid.size)})
    assert prop.ended_by == "overflow"
    finite = prop.log_y[np.isfinite(prop.log_y)]
    assert finite.size and np.all(finite <= 709.8)
    assert_matches(
        prop.log_y[: finite.size],
        1.0 / 1500 * (1501 * np.exp(1500 * prop.times[: finite.size]) - 1),
    )


@pytest.mark.parametrize("seed", range(6))
def test_end_segments_are_guarded_against_extrapolation(seed: int) -> None:
    """Between ``t0`` and the first node (and the last node and ``T``) the panel polynomial
    extrapolates; there the forcing is at least its value at the nearest node. With rate 0 and
    initial value 0 the bound at the first node is therefore at least ``(t_1 - t0) g(t_1)``
    (by the mean-value property of the integral), for any positive node values -- including
    rough ones whose polynomial dives below zero before ``t_1`` (before the guard: bounds
    below the true error at the first node, found by tools/probe_soundness.py)."""
    rng = np.random.default_rng(seed)
    grid = gauss_grid(0.0, 1.0, 1, 9)
    g = rng.uniform(0.1, 1.0, grid.size)
    prop = propagate(grid, Rate(constant=0.0), 0.0, {"g": g})
    first = int(np.searchsorted(prop.times, grid.nodes[0]))
    assert prop.times[first] == pytest.approx(grid.nodes[0])
    y_first = math.exp(prop.log_y[first])
    assert y_first >= (grid.nodes[0] - grid.t0) * g[0] * (1 - 1e-9)
    y_last_node = math.exp(prop.log_y[first + grid.size - 1])
    y_end = math.exp(prop.log_y[-1])
    assert y_end - y_last_node >= (grid.t_end - grid.nodes[-1]) * g[-1] * (1 - 1e-9)


def test_huge_rate_ends_the_bound_instead_of_raising() -> None:
    """A rate integral far beyond the float range of the sub-interval count (true but huge
    regularity values, e.g. sup_abs_y = 1e25 for y' = y^2) must end the bound (vacuous), not
    overflow the int64 piece count (an HTTP 500 found by tools/probe_soundness.py)."""
    grid = gauss_grid(0.0, 1.0, 1, 4)
    prop = propagate(grid, Rate(constant=2e25), 1e-4, {"g": np.full(grid.size, 1e-4)})
    assert np.isnan(prop.log_y[-1]) or prop.log_y[-1] == math.inf or prop.ended_at is not None
