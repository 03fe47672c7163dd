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

from boundsvc.gronwall import Rate, propagate
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


@pytest.mark.parametrize("big", [1.0, 60.0])
def test_time_varying_rate_matches_ode(big: float) -> None:
    """a(t) = big * (1 + sin 3t) + 1/(1.25 - t): many pieces per step when ``big`` is large."""

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
