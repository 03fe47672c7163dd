"""The demo scenario (cooling steel strip): exact solution, data and problem dict.

The exact solution is checked without sympy: against derivatives written out by
hand below, and against high-order finite differences of the shipped function.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from demo import scenario
from demo.model import load_demo_model

K = scenario.K
PI = math.pi


def grid(n: int = 101) -> tuple[np.ndarray, np.ndarray]:
    t = np.linspace(0.0, scenario.T_END, n)
    x = np.linspace(*scenario.X_DOMAIN, n)
    return np.meshgrid(t, x, indexing="ij")


def u_t_by_hand(t: np.ndarray, x: np.ndarray) -> np.ndarray:
    return -0.6 * K * PI**2 * np.exp(-K * PI**2 * t) * np.sin(PI * x) - 0.15 * 9 * K * PI**2 * (
        np.exp(-9 * K * PI**2 * t) * np.sin(3 * PI * x)
    )


def u_xx_by_hand(t: np.ndarray, x: np.ndarray) -> np.ndarray:
    return -0.6 * PI**2 * np.exp(-K * PI**2 * t) * np.sin(PI * x) - 0.15 * 9 * PI**2 * (
        np.exp(-9 * K * PI**2 * t) * np.sin(3 * PI * x)
    )


def test_exact_solution_matches_the_formula() -> None:
    t, x = grid()
    ref = (
        1
        - 0.8 * x
        + 0.6 * np.exp(-K * PI**2 * t) * np.sin(PI * x)
        + 0.15 * np.exp(-9 * K * PI**2 * t) * np.sin(3 * PI * x)
    )
    np.testing.assert_allclose(scenario.exact_solution(t, x), ref, rtol=0, atol=1e-15)


def test_exact_solution_satisfies_the_pde_with_analytic_derivatives() -> None:
    t, x = grid()
    residual = u_t_by_hand(t, x) - K * u_xx_by_hand(t, x)
    assert np.max(np.abs(residual)) < 1e-12


def test_exact_solution_satisfies_the_pde_by_high_order_finite_differences() -> None:
    # Eighth-order central stencils; the solution is entire, so truncation is tiny.
    t, x = grid(41)
    t = 0.05 + 0.4 * t / scenario.T_END  # keep the stencils inside the time window
    h_t, h = 2e-3, 1e-2  # the 3rd mode decays at rate 9 k pi^2 ~ 35.5
    d1 = [1 / 280, -4 / 105, 1 / 5, -4 / 5, 0, 4 / 5, -1 / 5, 4 / 105, -1 / 280]
    d2 = [-1 / 560, 8 / 315, -1 / 5, 8 / 5, -205 / 72, 8 / 5, -1 / 5, 8 / 315, -1 / 560]
    u = scenario.exact_solution
    u_t = sum(c * u(t + k * h_t, x) for c, k in zip(d1, range(-4, 5), strict=True)) / h_t
    u_xx = sum(c * u(t, x + k * h) for c, k in zip(d2, range(-4, 5), strict=True)) / h**2
    np.testing.assert_allclose(u_t, u_t_by_hand(t, x), atol=1e-10)
    np.testing.assert_allclose(u_xx, u_xx_by_hand(t, x), atol=1e-8)
    assert np.max(np.abs(u_t - K * u_xx)) < 1e-8


def test_exact_solution_satisfies_initial_and_boundary_data() -> None:
    x = np.linspace(0.0, 1.0, 1001)
    t = np.linspace(0.0, scenario.T_END, 1001)
    u0 = 1 - 0.8 * x + 0.6 * np.sin(PI * x) + 0.15 * np.sin(3 * PI * x)
    np.testing.assert_allclose(scenario.initial_value(x), u0, rtol=0, atol=1e-15)
    assert np.max(np.abs(scenario.exact_solution(0.0, x) - u0)) < 1e-12
    assert np.max(np.abs(scenario.exact_solution(t, 0.0) - 1.0)) < 1e-12
    assert np.max(np.abs(scenario.exact_solution(t, 1.0) - 0.2)) < 1e-12
    np.testing.assert_allclose(scenario.boundary_value(t, 0.0), scenario.LEFT_VALUE)
    np.testing.assert_allclose(scenario.boundary_value(t, 1.0), scenario.RIGHT_VALUE)
    np.testing.assert_allclose(scenario.steady_state([0.0, 1.0]), [1.0, 0.2])


def test_problem_dict_wire_format() -> None:
    assert scenario.PROBLEM == {
        "equation": "u_t = k*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 0.5],
        "parameters": {"k": 0.4},
        "boundary": "dirichlet",
        "initial_value": "1 - 0.8*x + 0.6*sin(pi*x) + 0.15*sin(3*pi*x)",
        "boundary_value": "1 - 0.8*x",
    }
    assert scenario.PROBLEM["parameters"]["k"] == scenario.K
    assert scenario.PROBLEM["time"] == [0.0, scenario.T_END]
    assert tuple(scenario.PROBLEM["space"]["x"]) == scenario.X_DOMAIN
    fresh = scenario.problem_dict()
    fresh["parameters"]["k"] = 1.0
    assert scenario.PROBLEM["parameters"]["k"] == 0.4


@pytest.mark.parametrize(("key", "func"), [("initial_value", "iv"), ("boundary_value", "bv")])
def test_problem_expressions_agree_with_the_numpy_functions(key: str, func: str) -> None:
    x = np.linspace(0.0, 1.0, 257)
    namespace = {"x": x, "sin": np.sin, "pi": np.pi, "__builtins__": {}}
    value = eval(scenario.PROBLEM[key], namespace)  # trusted constant from demo/scenario.py
    ref = scenario.initial_value(x) if func == "iv" else scenario.boundary_value(0.0, x)
    np.testing.assert_allclose(value, ref, rtol=0, atol=1e-15)


def test_shipped_model_approximates_the_exact_solution() -> None:
    net = load_demo_model()
    t, x = grid(81)
    pts = np.column_stack([t.ravel(), x.ravel()])
    err = net(pts) - scenario.exact_solution(pts[:, 0], pts[:, 1])
    rel_l2 = float(np.sqrt(np.mean(err**2) / np.mean(scenario.exact_solution(t, x) ** 2)))
    assert rel_l2 < 2e-3
    f = net.fields(pts, [(1, 0), (0, 2)])
    residual = f[(1, 0)] - K * f[(0, 2)]
    assert float(np.sqrt(np.mean(residual**2))) < 0.05  # a PINN residual, not zero
