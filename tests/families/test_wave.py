"""Wave family: bounds against closed-form solutions of the literature.

Every exact solution is first checked symbolically against its equation. Surrogates are
``u_exact + eps * phi`` (three sizes each); residuals of every component (interior, initial,
initial_t, initial_<axis>, boundary, boundary_t, periodic, periodic_t, periodic_<axis>) are
computed from the perturbation with sympy derivatives written out here, independently of the
service's parser; the true error is integrated by an independent fine Gauss-Legendre rule
(``tests/families/manufactured.py``). Effectivities (bound / true error) are written to the
file named by ``BOUNDSVC_EFFECTIVITY_LOG`` when it is set.
"""

from __future__ import annotations

import json
import math
import os
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest
import sympy as sp

from api_schemas import ProblemSpec
from boundsvc.certify import build_plan, certify, derive
from boundsvc.errors import ProblemNotCovered, RegularityError, ResidualError
from boundsvc.families import classify, problem_sha256
from boundsvc.families.wave import energy_rate
from tests.families.manufactured import SPACE_SYMBOLS, TrueError, t, true_error_nd, x, y, z
from tests.families.support import assert_bound_holds

EPS = [1e-1, 1e-2, 1e-3]
# moves the boundary values and breaks periodicity (not periodic on [0, 1])
PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)
PI = sp.pi

Operator = Callable[[sp.Expr], sp.Expr]


def _fn(expr: sp.Expr, axes: tuple[str, ...]) -> Callable[..., np.ndarray]:
    f = sp.lambdify((t, *[SPACE_SYMBOLS[a] for a in axes]), expr, modules="numpy")

    def call(*cols: np.ndarray) -> np.ndarray:
        return np.broadcast_to(np.asarray(f(*cols), dtype=float), np.shape(cols[0])).copy()

    return call


def wave_residuals(
    plan: Any,
    u_model: sp.Expr,
    u_exact: sp.Expr,
    operator: Operator,
    space: dict[str, tuple[float, float]],
) -> dict[str, list[float]]:
    """Every component of the wave layout (docs/api.md) from the model and exact solution."""
    axes = tuple(space)
    comps = plan.components
    err = u_model - u_exact
    out: dict[str, list[float]] = {}
    p = comps["interior"].points
    out["interior"] = _fn(operator(u_model), axes)(*p.T).tolist()
    t0 = plan.time.t0
    xs = comps["initial"].points
    tcol = np.full(xs.shape[0], t0)
    out["initial"] = _fn(err, axes)(tcol, *xs.T).tolist()
    out["initial_t"] = _fn(sp.diff(err, t), axes)(tcol, *xs.T).tolist()
    for a in axes:
        out[f"initial_{a}"] = _fn(sp.diff(err, SPACE_SYMBOLS[a]), axes)(tcol, *xs.T).tolist()
    if "boundary" in comps:
        pb = comps["boundary"].points
        out["boundary"] = _fn(err, axes)(*pb.T).tolist()
        out["boundary_t"] = _fn(sp.diff(err, t), axes)(*pb.T).tolist()
    if "periodic" in comps:
        comp = comps["periodic"]
        pp = comp.points
        face_axis = np.array([comp.faces[i].axis for i in comp.face_index])

        def mismatch(expr: sp.Expr) -> np.ndarray:
            values = np.zeros(pp.shape[0])
            for a in axes:
                mask = face_axis == a
                if not np.any(mask):
                    continue
                s = SPACE_SYMBOLS[a]
                length = space[a][1] - space[a][0]
                jump = expr.subs(s, s + length) - expr  # points lie on the low face
                values[mask] = _fn(jump, axes)(*pp[mask].T)
            return values

        out["periodic"] = mismatch(u_model).tolist()
        out["periodic_t"] = mismatch(sp.diff(u_model, t)).tolist()
        for a in axes:
            out[f"periodic_{a}"] = mismatch(sp.diff(u_model, SPACE_SYMBOLS[a])).tolist()
    return out


def sampled_sup(expr: sp.Expr, time: tuple[float, float], space: dict[str, Any]) -> float:
    """Sampled sup of |expr| over the closed box, with a 5 % margin (a test input only)."""
    axes = tuple(space)
    n = {1: 200, 2: 40, 3: 16}[len(axes)]
    grids = np.meshgrid(
        np.linspace(*time, 60), *[np.linspace(*space[a], n) for a in axes], indexing="ij"
    )
    values = _fn(expr, axes)(*[g.ravel() for g in grids])
    return 1.05 * float(np.max(np.abs(values))) + 1e-12


def run(
    problem: dict[str, Any],
    regularity: dict[str, Any],
    u_model: sp.Expr,
    u_exact: sp.Expr,
    operator: Operator,
    points: dict[str, int],
    rule: str = "gauss-legendre",
    extra: dict[str, Any] | None = None,
) -> tuple[dict[str, Any], TrueError]:
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    assert classified.family.id == "wave"
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified,
        {"problem_id": pid, "rule": rule, "points": points, "panels": {}, **(extra or {})},
    )
    space = {a: tuple(v) for a, v in problem["space"].items()}
    residuals = wave_residuals(plan, u_model, u_exact, operator, space)
    doc = certify(classified, pid, plan, regularity, residuals, None).document
    n_space = {1: 200, 2: 50, 3: 16}[len(space)]
    err = true_error_nd(u_model - u_exact, tuple(problem["time"]), space, n_space=n_space)
    return doc, err


def check(doc: dict[str, Any], err: TrueError) -> float:
    """``assert_bound_holds`` (space-time, final time, every profile time) with a relative
    slack of 1e-12 for the ulp-level difference of two quadratures of the same initial data."""
    slack = 1 - 1e-12
    scaled = TrueError(
        space_time=err.space_time * slack,
        final_time=err.final_time * slack,
        at=lambda tk: err.at(tk) * slack,
    )
    eff = assert_bound_holds(doc, scaled)
    assert math.isfinite(eff) and eff >= 1.0
    return eff


def _log(case: str, eps: float, eff: float, doc: dict[str, Any], err: TrueError) -> None:
    print(
        f"{case} eps={eps:g}: true {err.space_time:.3e} bound "
        f"{doc['bound']['l2_space_time']:.3e} effectivity {eff:.3g}"
    )
    path = os.environ.get("BOUNDSVC_EFFECTIVITY_LOG")
    if path:
        with open(path, "a", encoding="utf-8") as fh:
            fh.write(json.dumps({"family": "wave", "case": case, "eps": eps, "eff": eff}) + "\n")


# ------------------------------------------------------------------ 1. standing mode
C1 = 2
U1 = sp.sin(2 * PI * x) * sp.cos(2 * PI * C1 * t)


def op1(u: sp.Expr) -> sp.Expr:
    return sp.diff(u, t, 2) - C1**2 * sp.diff(u, x, 2)


STANDING_PROBLEM = {
    "equation": "u_tt = c^2*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 1.0],
    "parameters": {"c": float(C1)},
    "boundary": "dirichlet",
    "initial_value": "sin(2*pi*x)",
    "initial_velocity": "0",
    "boundary_value": "0",
}


def test_standing_mode_solves_its_equation() -> None:
    """Separation of variables on a string with fixed ends: u = sin(k pi x) cos(k pi c t)
    (Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 4.1, eq. (4.1.9) -- equation number
    from memory); here k = 2 on [0, 1]."""
    assert sp.simplify(op1(U1)) == 0
    assert U1.subs(x, 0) == 0 and sp.simplify(U1.subs(x, 1)) == 0


@pytest.mark.parametrize("eps", EPS)
def test_standing_mode_dirichlet(eps: float) -> None:
    """Strauss 2008, sec. 4.1 (standing wave of the fixed string, from memory); the perturbation
    moves the boundary values, so the flux estimate has the boundary energy flux
    2 c^2 int |d_t R_b| (G_u + G_m); the lifted estimate removes it."""
    problem = STANDING_PROBLEM
    space = {"x": (0.0, 1.0)}
    grad_u = 2 * math.pi  # sup |u_x| of the exact solution, exact
    regularity = {
        "sup_abs_u_x": grad_u,
        "sup_abs_model_u_x": grad_u + eps * sampled_sup(sp.diff(PHI, x), (0, 1), space),
    }
    u_model = U1 + eps * PHI
    doc, err = run(problem, regularity, u_model, U1, op1, {"t": 24, "x": 24})
    eff = check(doc, err)
    # both estimates are assembled (docs/theory/wave.md, "Boundary lifting"); the lifted one
    # has no boundary energy flux and is reported, below the flux estimate
    names = {term["name"] for term in doc["terms"]}
    assert "boundary lifting" in names and "boundary energy flux" not in names
    note = next(w for w in doc["warnings"] if "valid estimates were assembled" in w)
    assert "reported (boundary lifting)" in note
    flux = float(note.split("boundary flux estimate: l2_space_time ")[1].split(",")[0])
    assert doc["bound"]["l2_space_time"] < flux
    print(f"standing mode eps={eps:g}: flux estimate {flux:.3e}, lifted {doc['bound']}")
    _log("standing-mode", eps, eff, doc, err)


# ---------------------------------------------------------- 2. d'Alembert on a ring
C2 = sp.Rational(3, 2)
U2 = sp.sin(2 * PI * (x - C2 * t)) + sp.Rational(1, 2) * sp.cos(4 * PI * (x + C2 * t))


def op2(u: sp.Expr) -> sp.Expr:
    return sp.diff(u, t, 2) - C2**2 * sp.diff(u, x, 2)


def test_dalembert_solves_its_equation() -> None:
    """d'Alembert's formula u = F(x - c t) + G(x + c t) (d'Alembert 1747; Evans, PDE, 2nd ed.
    2010, sec. 2.4.1, eq. (8) -- equation number from memory)."""
    assert sp.simplify(op2(U2)) == 0
    assert sp.simplify(U2.subs(x, x + 1) - U2) == 0  # 1-periodic


@pytest.mark.parametrize("eps", EPS)
def test_dalembert_periodic_with_mismatch(eps: float) -> None:
    """Evans 2010, sec. 2.4.1 (d'Alembert, from memory): two waves running round a ring road of
    length 1; the surrogate is not periodic, so both mismatch terms (P_x with sup |u_t|, P_t
    with sup |u_x|) enter."""
    problem = {
        "equation": "u_tt = 2.25*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "boundary": "periodic",
    }
    space = {"x": (0.0, 1.0)}
    u_model = U2 + eps * PHI
    regularity = {
        "sup_abs_u_t": 6 * math.pi,  # |u_t| <= c (2 pi + 0.5 * 4 pi), exact
        "sup_abs_model_u_t": 6 * math.pi + eps * sampled_sup(sp.diff(PHI, t), (0, 1), space),
        "sup_abs_u_x": 4 * math.pi,
        "sup_abs_model_u_x": 4 * math.pi + eps * sampled_sup(sp.diff(PHI, x), (0, 1), space),
    }
    doc, err = run(problem, regularity, u_model, U2, op2, {"t": 24, "x": 32})
    eff = check(doc, err)
    assert "periodicity mismatch along x" in {term["name"] for term in doc["terms"]}
    _log("dalembert-ring", eps, eff, doc, err)


def test_dalembert_mismatch_needs_velocity_bound() -> None:
    """A non-periodic surrogate needs sup_abs_u_t: a 422 naming the key, not a silent bound."""
    problem = {
        "equation": "u_tt = 2.25*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "boundary": "periodic",
    }
    with pytest.raises(RegularityError, match="sup_abs_u_t") as info:
        run(problem, {}, U2 + 0.1 * PHI, U2, op2, {"t": 8, "x": 8})
    assert info.value.field == "regularity.sup_abs_u_t"


# ------------------------------------------------------------- 3. 2-D periodic mode
U3 = sp.cos(2 * PI * x) * sp.sin(2 * PI * y) * sp.cos(2 * sp.sqrt(2) * PI * t)
PHI3 = sp.sin(t + 1) * sp.sin(2 * PI * x + 1) * sp.cos(2 * PI * y) + t**2 * sp.cos(4 * PI * y)


def op3(u: sp.Expr) -> sp.Expr:
    return sp.diff(u, t, 2) - (sp.diff(u, x, 2) + sp.diff(u, y, 2))


def test_membrane_mode_solves_its_equation() -> None:
    """Normal mode of the periodic membrane, frequency 2 pi |k| for k = (1, 1) (Evans 2010,
    sec. 2.4 / Strauss 2008, sec. 10.3; from memory)."""
    assert sp.simplify(op3(U3)) == 0


@pytest.mark.parametrize("eps", EPS)
def test_membrane_mode_periodic_2d(eps: float) -> None:
    """Strauss 2008, sec. 10.3 (vibrating membrane modes, from memory) on the periodic unit
    square; the perturbation is periodic, so the mismatch terms are at rounding level (the sup
    bounds are still needed: float64 periodicity is not exact)."""
    problem = {
        "equation": "u_tt - c^2*(u_xx + u_yy) = 0",
        "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
        "time": [0.0, 0.5],
        "parameters": {"c": 1.0},
        "boundary": "periodic",
    }
    space = {"x": (0.0, 1.0), "y": (0.0, 1.0)}
    u_model = U3 + eps * PHI3
    w = 2 * math.sqrt(2) * math.pi
    regularity = {
        "sup_abs_u_t": w,
        "sup_abs_model_u_t": w + eps * sampled_sup(sp.diff(PHI3, t), (0, 0.5), space),
        "sup_grad_u": w,
        "sup_grad_model_u": sampled_sup(
            sp.sqrt(sp.diff(u_model, x) ** 2 + sp.diff(u_model, y) ** 2), (0, 0.5), space
        ),
    }
    doc, err = run(problem, regularity, u_model, U3, op3, {"t": 12, "x": 16, "y": 16})
    eff = check(doc, err)
    _log("membrane-2d", eps, eff, doc, err)


# -------------------------------------------------- 4. damped Klein-Gordon (telegraph)
B4, M4 = sp.Rational(2, 5), sp.Integer(3)
OMEGA4 = sp.sqrt(PI**2 + M4 - B4**2 / 4)
U4 = sp.exp(-B4 * t / 2) * sp.sin(PI * x) * sp.cos(OMEGA4 * t)


def op4(u: sp.Expr) -> sp.Expr:
    return sp.diff(u, t, 2) + B4 * sp.diff(u, t) - sp.diff(u, x, 2) + M4 * u


def test_telegraph_mode_solves_its_equation() -> None:
    """Damped Klein-Gordon (telegraph) mode e^{-bt/2} sin(pi x) cos(omega t),
    omega^2 = pi^2 + m - b^2/4 (separation of variables; Evans 2010, sec. 2.4 problem set /
    Strauss 2008, sec. 4.1 exercise on the damped string -- from memory)."""
    assert sp.simplify(op4(U4)) == 0


@pytest.mark.parametrize("eps", EPS)
def test_telegraph_mode_dirichlet(eps: float) -> None:
    """Damped Klein-Gordon mode (see above) on [0, 1], T = 2: damping and reaction enter the
    rate r(mu); with mu = m the cross term vanishes."""
    problem = {
        "equation": "u_tt + b*u_t = u_xx - m*u",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 2.0],
        "parameters": {"b": float(B4), "m": float(M4)},
        "boundary": "dirichlet",
    }
    space = {"x": (0.0, 1.0)}
    regularity = {
        "sup_abs_u_x": math.pi,  # |u_x| <= pi e^{-bt/2} <= pi
        "sup_abs_model_u_x": math.pi + eps * sampled_sup(sp.diff(PHI, x), (0, 2), space),
    }
    doc, err = run(problem, regularity, U4 + eps * PHI, U4, op4, {"t": 32, "x": 24})
    eff = check(doc, err)
    # damping and mass enter L B r (docs/theory/wave.md W3); the lifted estimate is assembled
    note = next(w for w in doc["warnings"] if "valid estimates were assembled" in w)
    assert "boundary lifting: l2_space_time" in note
    _log("telegraph", eps, eff, doc, err)


def test_lifting_refused_for_an_inconsistent_boundary_t() -> None:
    """W1: a boundary_t that is not the time derivative of the boundary residual (here scaled
    by 1.5) refuses the lifting with a warning; the flux estimate alone is reported."""
    problem = STANDING_PROBLEM
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified,
        {"problem_id": pid, "rule": "gauss-legendre", "points": {"t": 24, "x": 24}, "panels": {}},
    )
    eps = 1e-2
    residuals = wave_residuals(plan, U1 + eps * PHI, U1, op1, {"x": (0.0, 1.0)})
    residuals["boundary_t"] = [1.5 * v for v in residuals["boundary_t"]]
    grad_u = 2 * math.pi
    regularity = {
        "sup_abs_u_x": grad_u,
        "sup_abs_model_u_x": grad_u + eps * sampled_sup(sp.diff(PHI, x), (0, 1), {"x": (0, 1)}),
    }
    doc = certify(classified, pid, plan, regularity, residuals, None).document
    assert any(
        w.startswith("boundary lifting not used: boundary_t differs") for w in doc["warnings"]
    )
    assert "boundary energy flux" in {term["name"] for term in doc["terms"]}


# ----------------------------------------------------- 5. 3-D cube, standing mode
U5 = sp.sin(PI * x) * sp.sin(PI * y) * sp.sin(PI * z) * sp.cos(sp.sqrt(3) * PI * t)
PHI5 = sp.sin(2 * t + 1) * (x + y * z + sp.Rational(1, 3))


def op5(u: sp.Expr) -> sp.Expr:
    return sp.diff(u, t, 2) - (sp.diff(u, x, 2) + sp.diff(u, y, 2) + sp.diff(u, z, 2))


def test_cube_mode_solves_its_equation() -> None:
    """Lowest Dirichlet mode of the unit cube, frequency pi sqrt(3) (Strauss 2008, sec. 10.1;
    from memory)."""
    assert sp.simplify(op5(U5)) == 0


@pytest.mark.parametrize("eps", EPS)
def test_cube_mode_dirichlet_3d(eps: float) -> None:
    """Strauss 2008, sec. 10.1 (from memory): three space dimensions, six Dirichlet faces."""
    problem = {
        "equation": "u_tt = u_xx + u_yy + u_zz",
        "space": {"x": [0.0, 1.0], "y": [0.0, 1.0], "z": [0.0, 1.0]},
        "time": [0.0, 0.5],
        "boundary": "dirichlet",
    }
    space = {"x": (0.0, 1.0), "y": (0.0, 1.0), "z": (0.0, 1.0)}
    grad_phi = sampled_sup(sp.sqrt(sum(sp.diff(PHI5, s) ** 2 for s in (x, y, z))), (0, 0.5), space)
    regularity = {"sup_grad_u": math.sqrt(3) * math.pi, "sup_grad_model_u": 6.0 + eps * grad_phi}
    doc, err = run(problem, regularity, U5 + eps * PHI5, U5, op5, {"t": 8, "x": 8, "y": 8, "z": 8})
    eff = check(doc, err)
    _log("cube-3d", eps, eff, doc, err)


# ----------------------------------------------------------- 6. forced, Sobol' plan
U6 = t**2 * sp.sin(PI * x)


def op6(u: sp.Expr) -> sp.Expr:
    return sp.diff(u, t, 2) - sp.diff(u, x, 2) - (2 + PI**2 * t**2) * sp.sin(PI * x)


def test_forced_solution_solves_its_equation() -> None:
    """Manufactured solution (Roache, J. Fluids Eng. 124 (2002) 4-10, the method; from
    memory)."""
    assert sp.simplify(op6(U6)) == 0


@pytest.mark.parametrize("eps", EPS)
def test_forced_wave_sobol_plan(eps: float) -> None:
    """Manufactured forced wave (Roache 2002, the method) with a scrambled Sobol' plan: the
    initial derivative components share the initial points and the initial energy is one
    statistical upper limit."""
    problem = {
        "equation": "u_tt = u_xx + (2 + pi^2*t^2)*sin(pi*x)",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "boundary": "dirichlet",
    }
    space = {"x": (0.0, 1.0)}
    regularity = {
        "sup_abs_u_x": math.pi,
        "sup_abs_model_u_x": math.pi + eps * sampled_sup(sp.diff(PHI, x), (0, 1), space),
    }
    doc, err = run(
        problem,
        regularity,
        U6 + eps * PHI,
        U6,
        op6,
        {"t": 16},
        rule="sobol",
        extra={"n": 16 * 64, "replicates": 8, "seed": 7},
    )
    eff = check(doc, err)
    initial = [s for s in doc["quadrature"]["statements"] if s["component"] == "initial"]
    assert len(initial) == 1 and initial[0]["rigor"] == "statistical"
    _log("forced-sobol", eps, eff, doc, err)


# ------------------------------------------------------------------ structure, refusals
def _spec(equation: str, **extra: Any) -> ProblemSpec:
    base: dict[str, Any] = {"equation": equation, "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]}
    return ProblemSpec.model_validate({**base, **extra})


def test_components_and_keys() -> None:
    classified = classify(_spec("u_tt = 4*u_xx"))
    assert classified.family.id == "wave"
    assert classified.components() == [
        "interior",
        "initial",
        "initial_t",
        "initial_x",
        "boundary",
        "boundary_t",
    ]
    assert [r.any_of[0] for r in classified.requirements()] == ["sup_abs_u_x", "sup_abs_model_u_x"]
    periodic = classify(
        ProblemSpec.model_validate(
            {
                "equation": "u_tt - c^2*(u_xx + u_yy) = 0",
                "space": {"x": [0, 1], "y": [0, 2]},
                "time": [0, 1],
                "parameters": {"c": 3.0},
                "boundary": "periodic",
            }
        )
    )
    assert periodic.components()[-4:] == ["periodic", "periodic_t", "periodic_x", "periodic_y"]
    assert periodic.requirements() == []
    assert periodic.description()["wave_speed_squared"] == {"x": "c^2", "y": "c^2"}


@pytest.mark.parametrize(
    ("equation", "reason"),
    [
        ("u_tt = -u_xx", "wrong sign"),
        ("u_tt = u*u_xx", "not linear"),
        ("u_tt = x*u_xx", "constant coefficients"),
        ("u_tt = u_xx + u_xt", "u_tx"),
        ("u_tt = u_t", "no u_xx term"),
    ],
)
def test_refusals_say_why(equation: str, reason: str) -> None:
    with pytest.raises(ProblemNotCovered) as info:
        classify(_spec(equation))
    assert reason in info.value.reasons["wave"]


def test_heat_equation_is_not_a_wave() -> None:
    from boundsvc.families import analyse
    from boundsvc.families.wave import WaveFamily

    reason = WaveFamily().recognise(analyse(_spec("u_t = u_xx")))
    assert isinstance(reason, str) and "no second time derivative" in reason
    assert classify(_spec("u_t = u_xx")).family.id != "wave"


def test_rate_formula() -> None:
    """r(mu) of docs/theory/wave.md: sqrt(mu) for the plain wave equation, max(0, -2b) at
    mu = m, and a strictly smaller rate with damping than without."""
    assert energy_rate(4.0, 0.0, 0.0, [0.0]) == pytest.approx(2.0)
    assert energy_rate(3.0, 0.2, 3.0, [0.0]) == 0.0
    assert energy_rate(3.0, -0.5, 3.0, [0.0]) == pytest.approx(1.0)
    assert energy_rate(1.0, 0.5, 0.0, [0.0]) < energy_rate(1.0, 0.0, 0.0, [0.0])
    assert energy_rate(1.0, 0.0, 1.0, [0.7, 0.2]) == pytest.approx(0.9)


def _plan_and_residuals(eps: float = 0.1) -> tuple[Any, Any, str, dict[str, list[float]]]:
    spec = _spec("u_tt = 4*u_xx")
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified,
        {"problem_id": pid, "rule": "gauss-legendre", "points": {"t": 8, "x": 8}, "panels": {}},
    )
    res = wave_residuals(plan, U1 + eps * PHI, U1, op1, {"x": (0.0, 1.0)})
    return classified, plan, pid, res


def test_wrong_length_names_component_and_index() -> None:
    classified, plan, pid, res = _plan_and_residuals()
    res["initial_t"] = res["initial_t"][:-1]
    reg = {"sup_abs_u_x": 7.0, "sup_abs_model_u_x": 8.0}
    with pytest.raises(ResidualError) as info:
        certify(classified, pid, plan, reg, res, None)
    assert info.value.field == "residuals.initial_t" and info.value.index == 7


def test_missing_component_is_refused() -> None:
    classified, plan, pid, res = _plan_and_residuals()
    del res["boundary_t"]
    with pytest.raises(ResidualError, match="boundary_t"):
        certify(classified, pid, plan, {"sup_abs_u_x": 7.0, "sup_abs_model_u_x": 8.0}, res, None)


def test_velocity_below_initial_data_is_invalid_hypotheses() -> None:
    """initial_velocity = 3 sin(pi x) contradicts sup_abs_u_t = 1 at t0."""
    spec = _spec(
        "u_tt = u_xx", space={"x": [0.0, 2.0]}, boundary="periodic", initial_velocity="3*sin(pi*x)"
    )
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified,
        {"problem_id": pid, "rule": "gauss-legendre", "points": {"t": 8, "x": 8}, "panels": {}},
    )
    exact = sp.sin(PI * t) * sp.sin(PI * x) * 3 / PI  # u_t(x, 0) = 3 sin(pi x)
    res = wave_residuals(
        plan, exact, exact, lambda u: sp.diff(u, t, 2) - sp.diff(u, x, 2), {"x": (0.0, 2.0)}
    )
    reg = {
        "sup_abs_u_t": 1.0,
        "sup_abs_model_u_t": 5.0,
        "sup_abs_u_x": 5.0,
        "sup_abs_model_u_x": 5.0,
    }
    doc = certify(classified, pid, plan, reg, res, None).document
    assert doc["status"] == "invalid-hypotheses"
    assert any("sup_abs_u_t" in w for w in doc["warnings"])


def test_exact_model_gives_zero_bound() -> None:
    """All residuals zero: the bound is exactly zero (nothing to propagate)."""
    classified, plan, pid, res = _plan_and_residuals(eps=0.0)
    doc = certify(
        classified,
        pid,
        plan,
        {"sup_abs_u_x": 7.0, "sup_abs_model_u_x": 7.0},
        {k: [0.0] * len(v) for k, v in res.items()},
        None,
    ).document
    assert doc["bound"]["l2_final_time"] == 0.0


def test_initial_velocity_must_not_depend_on_t() -> None:
    from boundsvc.errors import ProblemInvalid

    with pytest.raises(ProblemInvalid) as info:
        classify(_spec("u_tt = u_xx", initial_velocity="t*x"))
    assert info.value.field == "problem.initial_velocity"
