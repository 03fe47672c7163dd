"""Numpy adapters: residuals of a model at a plan's points (no server needed).

Known answer: ``u = exp(-k pi^2 t) sin(pi x)`` solves the heat equation ``u_t = k u_xx`` with
``u0 = sin(pi x)`` and ``g = 0`` (separation of variables; W. A. Strauss, *Partial Differential
Equations*, 2nd ed., Wiley 2008, ch. 4), so its residuals vanish to rounding.
"""

from __future__ import annotations

import itertools
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pytest

from boundsvc.client import MLPFields, Plan, PlanEvaluator, residuals_from_fields
from boundsvc.client._http import ComponentPoints
from boundsvc.client.mlp import MLP, residual_fields

K = 0.4
HEAT = {
    "equation": "u_t = k*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": K},
    "initial_value": "sin(pi*x)",
    "boundary_value": "0",
}


def gauss(n: int, a: float, b: float) -> tuple[np.ndarray, np.ndarray]:
    z, w = np.polynomial.legendre.leggauss(n)
    return 0.5 * (b - a) * z + 0.5 * (a + b), 0.5 * (b - a) * w


def make_plan(t0: float = 0.0, t1: float = 0.5, n: int = 6, periodic: bool = False) -> Plan:
    """A tensor Gauss plan shaped like the service's (time-major interior and boundary)."""
    ts, wt = gauss(n, t0, t1)
    xs, wx = gauss(n, 0.0, 1.0)
    interior = np.array(list(itertools.product(ts, xs)))
    w_int = np.array([a * b for a, b in itertools.product(wt, wx)])
    comps = {
        "interior": ComponentPoints("interior", ("t", "x"), interior, w_int),
        "initial": ComponentPoints("initial", ("x",), xs[:, None], wx),
    }
    faces = [0.0] if periodic else [0.0, 1.0]
    bnd = np.array([[t, x] for x in faces for t in ts])
    name = "periodic" if periodic else "boundary"
    comps[name] = ComponentPoints(name, ("t", "x"), bnd, np.tile(wt, len(faces)))
    return Plan("pln_test", "prb_test", "gauss-legendre", comps)


class ExactHeat:
    """A field evaluator that knows its own derivatives (closed form)."""

    def __init__(self) -> None:
        self.calls: list[np.ndarray] = []

    def __call__(self, points: np.ndarray, names: Sequence[str]) -> Mapping[str, Any]:
        self.calls.append(points.copy())
        t, x = points[:, 0], points[:, 1]
        decay = np.exp(-K * np.pi**2 * t)
        table = {
            "u": decay * np.sin(np.pi * x),
            "u_t": -K * np.pi**2 * decay * np.sin(np.pi * x),
            "u_x": np.pi * decay * np.cos(np.pi * x),
            "u_xx": -(np.pi**2) * decay * np.sin(np.pi * x),
        }
        return {name: table[name] for name in names if name in table}


def heat_operator(f: Mapping[str, np.ndarray]) -> np.ndarray:
    return f["u_t"] - K * f["u_xx"]


def test_exact_solution_has_vanishing_residuals() -> None:
    ev = PlanEvaluator.for_problem(ExactHeat(), HEAT)
    res = ev.residuals(
        make_plan(),
        heat_operator,
        names=("u_t", "u_xx"),
        initial_value=lambda x: np.sin(np.pi * x),
        boundary_value=lambda t, x: 0.0 * x,
    )
    assert set(res) == {"interior", "initial", "boundary"}
    assert res["interior"].shape == (36,) and res["initial"].shape == (6,)
    assert res["boundary"].shape == (12,)
    for values in res.values():
        assert values.dtype == np.float64
        assert np.max(np.abs(values)) < 1e-13


def test_residual_definitions_are_model_minus_data() -> None:
    """initial = u_model(t0, x) - u0(x), boundary = u_model - g (api contract)."""
    ev = PlanEvaluator(ExactHeat(), t0=0.0)
    plan = make_plan()
    x0 = plan["initial"].column("x")
    init = ev.initial(plan, lambda x: np.zeros_like(x))
    assert np.allclose(init, np.sin(np.pi * x0), rtol=0, atol=1e-15)
    bnd = ev.boundary(plan, lambda t, x: 1.0 + 0 * t)
    expected = ExactHeat()(plan["boundary"].points, ["u"])["u"] - 1.0
    assert np.allclose(bnd, expected, rtol=0, atol=1e-15)


def test_initial_points_are_lifted_to_t0() -> None:
    exact = ExactHeat()
    ev = PlanEvaluator.for_problem(exact, {**HEAT, "time": [0.2, 1.0]})
    assert ev.t0 == 0.2
    ev.initial(make_plan(0.2, 1.0), lambda x: np.sin(np.pi * x))
    lifted = exact.calls[-1]
    assert lifted.shape == (6, 2) and np.all(lifted[:, 0] == 0.2)


def test_coordinates_are_available_to_the_operator() -> None:
    """A source term in (t, x): u_t - k u_xx - f(t, x)."""
    ev = PlanEvaluator(ExactHeat(), t0=0.0)
    plan = make_plan()
    res = ev.interior(plan, lambda f: heat_operator(f) - f["t"] * f["x"], ("u_t", "u_xx"))
    pts = plan["interior"].points
    assert np.allclose(res, -pts[:, 0] * pts[:, 1], rtol=0, atol=1e-13)


def test_mlp_adapter_equals_residual_fields() -> None:
    rng = np.random.default_rng(3)
    net = MLP.from_arrays(
        [rng.normal(size=(8, 2)), rng.normal(size=(1, 8))], [rng.normal(size=8), rng.normal(size=1)]
    )
    plan = make_plan()
    ev = PlanEvaluator(net, t0=0.0)
    assert isinstance(ev.fields, MLPFields)
    res = ev.interior(plan, heat_operator, ("u_t", "u_xx"))
    f = residual_fields(net, plan["interior"].points, ("t", "x"), ("u_t", "u_xx"))
    assert np.array_equal(res, f["u_t"] - K * f["u_xx"])
    direct = residuals_from_fields(
        heat_operator, net, plan["interior"].points, axes=("t", "x"), names=("u_t", "u_xx")
    )
    assert np.array_equal(direct, res)


def test_sup_abs_samples_the_model() -> None:
    ev = PlanEvaluator(ExactHeat(), t0=0.0)
    pts = np.array([[0.0, 0.0], [0.0, 0.5], [0.1, 1.0]])
    assert ev.sup_abs("u_x", pts) == pytest.approx(np.pi)


def test_other_components_come_from_callables() -> None:
    ev = PlanEvaluator(ExactHeat(), t0=0.0)
    plan = make_plan(periodic=True)
    with pytest.raises(ValueError, match=r"component 'periodic'.*others="):
        ev.residuals(
            plan, heat_operator, names=("u_t", "u_xx"), initial_value=lambda x: np.sin(np.pi * x)
        )
    res = ev.residuals(
        plan,
        heat_operator,
        names=("u_t", "u_xx"),
        initial_value=lambda x: np.sin(np.pi * x),
        others={"periodic": lambda comp: np.zeros(comp.size)},
    )
    assert res["periodic"].shape == (6,)
    with pytest.raises(ValueError, match="does not have"):
        ev.residuals(
            plan,
            heat_operator,
            names=("u_t", "u_xx"),
            initial_value=np.sin,
            others={"periodic": lambda c: np.zeros(c.size), "extra": lambda c: np.zeros(1)},
        )


def test_missing_data_functions_are_named() -> None:
    ev = PlanEvaluator(ExactHeat(), t0=0.0)
    with pytest.raises(ValueError, match="pass initial_value"):
        ev.residuals(make_plan(), heat_operator, names=("u_t", "u_xx"))
    with pytest.raises(ValueError, match="pass boundary_value"):
        ev.residuals(
            make_plan(),
            heat_operator,
            names=("u_t", "u_xx"),
            initial_value=lambda x: np.sin(np.pi * x),
        )


def test_shape_errors_are_explained() -> None:
    ev = PlanEvaluator(ExactHeat(), t0=0.0)
    plan = make_plan()
    with pytest.raises(ValueError, match="operator returned shape"):
        ev.interior(plan, lambda f: np.zeros(3), ("u_t",))
    with pytest.raises(ValueError, match="initial_value returned shape"):
        ev.initial(plan, lambda x: np.zeros(2))
    with pytest.raises(ValueError, match=r"did not return \['u_tt'\]"):
        ev.interior(plan, heat_operator, ("u_tt",))
    with pytest.raises(ValueError, match="axes must start with 't'"):
        PlanEvaluator(ExactHeat(), t0=0.0, axes=("x", "t"))
    with pytest.raises(ValueError, match="steady"):
        PlanEvaluator.for_problem(ExactHeat(), {"equation": "u_xx = 1", "space": {"x": [0, 1]}})
    with pytest.raises(TypeError, match="expected an MLP or a callable"):
        PlanEvaluator(42, t0=0.0)  # type: ignore[arg-type]
