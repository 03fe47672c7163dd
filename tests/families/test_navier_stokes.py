"""Incompressible Navier-Stokes / Euler: bounds against exact solutions of the literature.

Every surrogate is ``(u_model, p_model) = (u + eps * phi, p + eps * psi)`` with smooth fields
``phi`` (not divergence-free, so the divergence residual is exercised; in some cases not
periodic, so the periodicity terms are exercised, or not zero on the walls). Residuals are
computed here with sympy/numpy from the equations written out independently of the service's
parser; the true velocity error is integrated by an independent fine tensor Gauss-Legendre
rule. The bound must lie above the true error over space-time, at the final time and at every
time of the profile. Effectivities (bound / true error) are printed (``pytest -s``).
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import sympy as sp
from scipy.special import roots_legendre

from api_schemas import ProblemSpec
from boundsvc.api import build_app
from boundsvc.certify import build_plan, certify, derive
from boundsvc.errors import ProblemNotCovered, RegularityError
from boundsvc.families import classify, problem_sha256
from boundsvc.settings import Settings
from boundsvc.store import open_store
from tests.families.support import assert_bound_holds
from tests.inprocess import InProcessClient

t, x, y, z = sp.symbols("t x y z", real=True)
SYM = {"x": x, "y": y, "z": z}
EPSILONS = [1e-1, 1e-2, 1e-3]
TWO_PI = 2 * math.pi


@dataclass
class Flow:
    """An exact solution with its problem and the regularity of the exact solution."""

    name: str
    problem: dict[str, Any]
    velocity: list[sp.Expr]  # one component per axis, in axis order
    pressure: sp.Expr
    nu: float
    force: list[sp.Expr]
    regularity: dict[str, Any]
    points: dict[str, int]


def _fn(expr: sp.Expr, axes: Sequence[str]) -> Any:
    f = sp.lambdify((t, *[SYM[a] for a in axes]), expr, modules="numpy")

    def call(*cols: np.ndarray) -> np.ndarray:
        return np.broadcast_to(np.asarray(f(*cols), dtype=float), np.shape(cols[0])).copy()

    return call


def _momentum(vel: list[sp.Expr], p: sp.Expr, nu: float, force: list[sp.Expr], axes: Sequence[str]):
    """lhs - rhs of u_t + (u.grad)u + grad p - nu Lap u - f, and div u (written out here)."""
    out = []
    for i, c in enumerate(vel):
        conv = sum(vel[j] * sp.diff(c, SYM[b]) for j, b in enumerate(axes))
        lap = sum(sp.diff(c, SYM[b], 2) for b in axes)
        out.append(sp.diff(c, t) + conv + sp.diff(p, SYM[axes[i]]) - nu * lap - force[i])
    out.append(sum(sp.diff(c, SYM[b]) for c, b in zip(vel, axes, strict=True)))
    return out


def residuals(plan: Any, flow: Flow, vel_m: list[sp.Expr], p_m: sp.Expr) -> dict[str, Any]:
    """Residual rows of every component (interior: equation order; others: unknown order)."""
    axes = tuple(flow.problem["space"])
    comps = plan.components
    eqs = _momentum(vel_m, p_m, flow.nu, flow.force, axes)
    pts = comps["interior"].points
    out: dict[str, Any] = {"interior": np.stack([_fn(e, axes)(*pts.T) for e in eqs], axis=1)}
    t0 = plan.time.t0
    xs = comps["initial"].points
    tt = np.full(xs.shape[0], t0)
    init = [_fn(m - u, axes)(tt, *xs.T) for m, u in zip(vel_m, flow.velocity, strict=True)]
    out["initial"] = np.stack([*init, np.zeros(xs.shape[0])], axis=1)
    if "boundary" in comps:
        pb = comps["boundary"].points
        cols = [_fn(m - u, axes)(*pb.T) for m, u in zip(vel_m, flow.velocity, strict=True)]
        out["boundary"] = np.stack([*cols, np.zeros(pb.shape[0])], axis=1)
    for name in comps:
        if not name.startswith("periodic"):
            continue
        comp = comps[name]
        deriv = name.split("_")[1] if "_" in name else None
        fields = [*vel_m, p_m]
        if deriv is not None:
            fields = [sp.diff(f, SYM[deriv]) for f in fields]
        rows = np.zeros((comp.size, len(fields)))
        fns = [_fn(f, axes) for f in fields]
        for fidx, face in enumerate(comp.faces):
            mask = comp.face_index == fidx
            lo = comp.points[mask]
            hi = lo.copy()
            col = comp.axes.index(face.axis)
            hi[:, col] = flow.problem["space"][face.axis][1]
            for k, fn in enumerate(fns):
                rows[mask, k] = fn(*hi.T) - fn(*lo.T)
        out[name] = rows
    return {k: v.tolist() for k, v in out.items()}


@dataclass
class TrueError:
    space_time: float
    final_time: float
    times: dict[float, float]

    def at(self, tk: float) -> float:
        return self.times[tk]


def true_error(flow: Flow, error: list[sp.Expr], profile_t: Sequence[float], n: int) -> TrueError:
    """L2 norm of the velocity error by an independent tensor Gauss-Legendre rule (n per axis
    in space, 40 nodes in time)."""
    space = flow.problem["space"]
    axes = tuple(space)
    z0, w0 = roots_legendre(n)
    nodes = [0.5 * (space[a][1] - space[a][0]) * (z0 + 1) + space[a][0] for a in axes]
    weights = [0.5 * (space[a][1] - space[a][0]) * w0 for a in axes]
    grids = np.meshgrid(*nodes, indexing="ij")
    wflat = np.ones(grids[0].size)
    for wg in np.meshgrid(*weights, indexing="ij"):
        wflat = wflat * wg.ravel()
    cols = [g.ravel() for g in grids]
    fns = [_fn(e, axes) for e in error]

    def at(tk: float) -> float:
        tt = np.full(wflat.size, tk)
        return float(np.sqrt(np.dot(wflat, sum(f(tt, *cols) ** 2 for f in fns))))

    t0, t1 = flow.problem["time"]
    zt, wt = roots_legendre(40)
    ts = 0.5 * (t1 - t0) * (zt + 1) + t0
    st = math.sqrt(sum(0.5 * (t1 - t0) * w * at(tk) ** 2 for tk, w in zip(ts, wt, strict=True)))
    return TrueError(st, at(t1), {tk: at(tk) for tk in profile_t})


EFFECTIVITIES: list[str] = []


def run(
    flow: Flow,
    phi: list[sp.Expr],
    psi: sp.Expr,
    eps: float,
    model_regularity: dict[str, Any],
    n_true: int,
) -> tuple[dict[str, Any], TrueError]:
    spec = ProblemSpec.model_validate(flow.problem)
    classified = derive(spec)
    assert classified.family.id == "incompressible-navier-stokes"
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified,
        {"problem_id": pid, "rule": "gauss-legendre", "points": flow.points, "panels": {}},
    )
    # the exact solution must solve the equations (checks the closed forms used here)
    exact_res = residuals(plan, flow, flow.velocity, flow.pressure)
    assert np.max(np.abs(np.asarray(exact_res["interior"]))) < 1e-12
    vel_m = [u + eps * f for u, f in zip(flow.velocity, phi, strict=True)]
    res = residuals(plan, flow, vel_m, flow.pressure + eps * psi)
    regularity = {**flow.regularity, **model_regularity}
    doc = certify(classified, pid, plan, regularity, res, None).document
    err = true_error(flow, [eps * f for f in phi], doc["time_profile"]["t"], n_true)
    return doc, err


def _check(flow: Flow, eps: float, doc: dict[str, Any], err: TrueError) -> float:
    eff = assert_bound_holds(doc, err)
    final = doc["bound"]["l2_final_time"] / err.final_time
    EFFECTIVITIES.append(f"{flow.name} eps={eps:g}: space-time {eff:.3g}, final {final:.3g}")
    print(f"EFFECTIVITY {EFFECTIVITIES[-1]}")
    assert any("pressure error is not bounded" in w for w in doc["warnings"])
    return eff


# ----------------------------------------------------------------- 2-D Taylor-Green vortex
NS_2D = [
    "u_t + u*u_x + v*u_y + p_x = nu*(u_xx + u_yy)",
    "v_t + u*v_x + v*v_y + p_y = nu*(v_xx + v_yy)",
    "u_x + v_y = 0",
]


def taylor_green(nu: float = 0.1) -> Flow:
    """Taylor & Green, Proc. R. Soc. A 158 (1937) 499-521 (decaying vortex; the form below is
    the standard one, recalled from memory and checked here by the zero exact residual):
    u = -cos x sin y F, v = sin x cos y F, p = -(cos 2x + cos 2y) F^2 / 4, F = e^{-2 nu t},
    periodic on [0, 2 pi]^2."""
    f = sp.exp(-2 * nu * t)
    vel = [-sp.cos(x) * sp.sin(y) * f, sp.sin(x) * sp.cos(y) * f]
    p = -(sp.cos(2 * x) + sp.cos(2 * y)) * f**2 / 4
    decay = "exp(-2*nu*t)"
    # |d_j u_i| <= F (products of sines and cosines); |u|, |v| <= F; |p| <= F^2/2
    reg = {k: decay for k in ("sup_abs_u_x", "sup_abs_u_y", "sup_abs_v_x", "sup_abs_v_y")}
    reg |= {"sup_abs_u": decay, "sup_abs_v": decay, "sup_abs_p": "exp(-4*nu*t)/2"}
    return Flow(
        "taylor-green",
        {
            "equation": NS_2D,
            "unknowns": ["u", "v", "p"],
            "space": {"x": [0.0, TWO_PI], "y": [0.0, TWO_PI]},
            "time": [0.0, 1.0],
            "parameters": {"nu": nu},
            "boundary": "periodic",
        },
        vel,
        p,
        nu,
        [sp.Integer(0), sp.Integer(0)],
        reg,
        {"t": 8, "x": 16, "y": 16},
    )


# phi_v and psi are not periodic in x resp. y: the periodicity mismatch terms are exercised
TG_PHI = [sp.sin(2 * y + 1) * sp.cos(x + t), x / (2 * sp.pi) * sp.cos(y) * sp.exp(-t)]
TG_PSI = sp.cos(x - y) + y / (2 * sp.pi)


def _tg_model(eps: float) -> dict[str, Any]:
    # |phi_u| <= 1, |phi_v| <= 1 (x <= 2 pi), |psi| <= 2; derivatives of phi <= 2
    d = "exp(-2*nu*t)"
    reg = {
        "sup_abs_model_u": f"{d} + {eps}",
        "sup_abs_model_v": f"{d} + {eps}",
        "sup_abs_model_p": f"exp(-4*nu*t)/2 + {2 * eps}",
    }
    for k in ("u_x", "u_y", "v_x", "v_y"):
        reg[f"sup_abs_model_{k}"] = f"{d} + {2 * eps}"
    return reg


@pytest.mark.parametrize("eps", EPSILONS)
def test_taylor_green_vortex_periodic(eps: float) -> None:
    """Taylor-Green vortex (Taylor & Green 1937), nu = 0.1, T = 1, periodic box."""
    flow = taylor_green()
    doc, err = run(flow, TG_PHI, TG_PSI, eps, _tg_model(eps), n_true=48)
    _check(flow, eps, doc, err)
    names = {term["name"] for term in doc["terms"]}
    assert {"divergence residual", "periodicity mismatch along x"} <= names


def test_taylor_green_strain_key_tightens() -> None:
    """kappa = sup |sin x sin y| F = F for the Taylor-Green vortex (Taylor & Green 1937); from
    the entry bounds alone the 2-D bound gives sqrt(2) F. The strain key must give a smaller,
    still valid bound."""
    flow = taylor_green()
    eps = 1e-2
    doc_entries, err = run(flow, TG_PHI, TG_PSI, eps, _tg_model(eps), n_true=40)
    flow.regularity = {**flow.regularity, "sup_neg_strain": "exp(-2*nu*t)"}
    doc_strain, _ = run(flow, TG_PHI, TG_PSI, eps, _tg_model(eps), n_true=40)
    assert_bound_holds(doc_strain, err)
    assert doc_strain["bound"]["l2_final_time"] < doc_entries["bound"]["l2_final_time"]
    kappa = {c["symbol"]: c["value"] for c in doc_strain["constants"]}["kappa(t)"]
    kappa_entries = {c["symbol"]: c["value"] for c in doc_entries["constants"]}["kappa(t)"]
    assert kappa == pytest.approx(1.0, rel=1e-9)  # sup over [0, T] of e^{-2 nu t}, at t = 0
    assert kappa_entries == pytest.approx(math.sqrt(2) * kappa, rel=1e-6)


# --------------------------------------------------------------- 3-D ABC (Beltrami) flow
def abc_flow(nu: float = 0.05, a: float = 1.0, b: float = 0.8, c: float = 0.6) -> Flow:
    """Arnold-Beltrami-Childress flow (Arnold, C. R. Acad. Sci. Paris 261 (1965) 17-20;
    Childress, J. Math. Phys. 11 (1970) 3063; Dombre et al., J. Fluid Mech. 167 (1986) 353-391;
    recalled from memory): u = (A sin z + C cos y, B sin x + A cos z, C sin y + B cos x) F,
    curl u = u and Lap u = -u, so (u.grad)u = grad |u|^2/2 and with F = e^{-nu t},
    p = -|u|^2/2 it solves Navier-Stokes; periodic on [0, 2 pi]^3."""
    f = sp.exp(-nu * t)
    vel = [
        (a * sp.sin(z) + c * sp.cos(y)) * f,
        (b * sp.sin(x) + a * sp.cos(z)) * f,
        (c * sp.sin(y) + b * sp.cos(x)) * f,
    ]
    p = -sum(v**2 for v in vel) / 2
    e1, e2 = "exp(-nu*t)", "exp(-2*nu*t)"
    grads = {  # |d_j u_i|: the coefficient of the trigonometric factor (0 where absent)
        "u_x": 0,
        "u_y": c,
        "u_z": a,
        "v_x": b,
        "v_y": 0,
        "v_z": a,
        "w_x": b,
        "w_y": c,
        "w_z": 0,
    }
    reg: dict[str, Any] = {f"sup_abs_{k}": f"{g}*{e1}" for k, g in grads.items()}
    reg |= {
        "sup_abs_u": f"{a + c}*{e1}",
        "sup_abs_v": f"{a + b}*{e1}",
        "sup_abs_w": f"{b + c}*{e1}",
        "sup_abs_p": f"{((a + c) ** 2 + (a + b) ** 2 + (b + c) ** 2) / 2}*{e2}",
    }
    eq = [
        "u_t + u*u_x + v*u_y + w*u_z + p_x = nu*(u_xx + u_yy + u_zz)",
        "v_t + u*v_x + v*v_y + w*v_z + p_y = nu*(v_xx + v_yy + v_zz)",
        "w_t + u*w_x + v*w_y + w*w_z + p_z = nu*(w_xx + w_yy + w_zz)",
        "u_x + v_y + w_z = 0",
    ]
    return Flow(
        "abc-3d",
        {
            "equation": eq,
            "unknowns": ["u", "v", "w", "p"],
            "space": {a_: [0.0, TWO_PI] for a_ in ("x", "y", "z")},
            "time": [0.0, 0.5],
            "parameters": {"nu": nu},
            "boundary": "periodic",
        },
        vel,
        p,
        nu,
        [sp.Integer(0)] * 3,
        reg,
        {"t": 6, "x": 10, "y": 10, "z": 10},
    )


ABC_PHI = [
    sp.sin(x + 2 * z) * sp.exp(-t),
    sp.cos(y - z + t),
    z / (2 * sp.pi) * sp.sin(x),  # not periodic in z
]
ABC_PSI = sp.sin(x + y + z)


@pytest.mark.parametrize("eps", EPSILONS)
def test_abc_beltrami_flow_3d(eps: float) -> None:
    """ABC flow (Arnold 1965; Childress 1970), nu = 0.05, T = 0.5, periodic 3-D box."""
    flow = abc_flow()
    base = {k: v for k, v in flow.regularity.items() if k.count("_") == 3}
    # |phi_i| <= 1, |psi| <= 1, every first derivative of phi <= 2
    model = {k.replace("sup_abs_", "sup_abs_model_"): f"{v} + {2 * eps}" for k, v in base.items()}
    for c in ("u", "v", "w"):
        model[f"sup_abs_model_{c}"] = f"{flow.regularity[f'sup_abs_{c}']} + {eps}"
    model["sup_abs_model_p"] = f"{flow.regularity['sup_abs_p']} + {eps}"
    doc, err = run(flow, ABC_PHI, ABC_PSI, eps, model, n_true=24)
    _check(flow, eps, doc, err)


# ------------------------------------------------ plane Poiseuille channel (walls in y)
def poiseuille(nu: float = 0.2, big_u: float = 1.0) -> Flow:
    """Plane Poiseuille flow (Poiseuille 1840; e.g. Batchelor, An Introduction to Fluid
    Dynamics, CUP 1967, sec. 4.2, recalled): u = U (1 - y^2), v = 0 between no-slip walls
    y = +-1, driven by the body force f_x = 2 nu U (equivalent to a mean pressure gradient),
    p = 0; periodic in x with period 4."""
    vel = [big_u * (1 - y**2), sp.Integer(0)]
    g = 2 * nu * big_u
    eq = [
        "u_t + u*u_x + v*u_y + p_x = nu*(u_xx + u_yy) + g",
        "v_t + u*v_x + v*v_y + p_y = nu*(v_xx + v_yy)",
        "u_x + v_y = 0",
    ]
    reg = {
        "sup_abs_u_x": 0,
        "sup_abs_u_y": 2 * big_u,
        "sup_abs_v_x": 0,
        "sup_abs_v_y": 0,
        "sup_abs_u": big_u,
        "sup_abs_v": 0,
        "sup_abs_p": 0,
    }
    return Flow(
        "poiseuille",
        {
            "equation": eq,
            "unknowns": ["u", "v", "p"],
            "space": {"x": [0.0, 4.0], "y": [-1.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"nu": nu, "g": g},
            "boundary": {"x": "periodic", "y": "dirichlet"},
        },
        vel,
        sp.Integer(0),
        nu,
        [sp.Float(g), sp.Integer(0)],
        reg,
        {"t": 8, "x": 16, "y": 16},
    )


# periodic in x (period 4), not zero on the walls y = +-1
CH_PHI = [sp.cos(sp.pi * x / 2) * (1 + y / 2) * sp.exp(-t), sp.sin(sp.pi * x / 2) * (1 + y) / 2]
CH_PSI = sp.cos(sp.pi * x / 2 + y)


@pytest.mark.parametrize("eps", EPSILONS)
def test_poiseuille_channel_walls(eps: float) -> None:
    """Plane Poiseuille flow with no-slip walls (Batchelor 1967, sec. 4.2), nu = 0.2, T = 1."""
    flow = poiseuille()
    # |phi_u| <= 1.5, |phi_v| <= 1, |psi| <= 1; |d_y phi_u| <= 0.5, |d_y phi_v| <= 0.5,
    # |d_x phi_u| <= 1.5 pi/2, |d_x phi_v| <= pi/2 (the x keys: the periodicity residuals are
    # only zero up to rounding, so the viscous mismatch term needs them)
    model = {
        "sup_abs_model_u": 1.0 + 1.5 * eps,
        "sup_abs_model_v": eps,
        "sup_abs_model_p": eps,
        "sup_abs_model_u_y": 2.0 + 0.5 * eps,
        "sup_abs_model_v_y": 0.5 * eps,
        "sup_abs_model_u_x": 0.75 * math.pi * eps,
        "sup_abs_model_v_x": 0.5 * math.pi * eps,
    }
    doc, err = run(flow, CH_PHI, CH_PSI, eps, model, n_true=48)
    _check(flow, eps, doc, err)
    assert "wall flux" in {term["name"] for term in doc["terms"]}


# ------------------------------------------------------ Euler: steady shear, all walls
def euler_shear() -> Flow:
    """Steady parallel shear flow u = (y, 0), p = 0: an exact solution of the incompressible
    Euler equations (every parallel flow u = (U(y), 0) is; e.g. Drazin & Reid, Hydrodynamic
    Stability, CUP 1981, ch. 4, recalled) on [0, 1]^2 with the exact velocity as wall data."""
    eq = ["u_t + u*u_x + v*u_y + p_x = 0", "v_t + u*v_x + v*v_y + p_y = 0", "v_y + u_x = 0"]
    reg = {
        "sup_abs_u_x": 0,
        "sup_abs_u_y": 1,
        "sup_abs_v_x": 0,
        "sup_abs_v_y": 0,
        "sup_abs_u": 1,
        "sup_abs_v": 0,
        "sup_abs_p": 0,
    }
    return Flow(
        "euler-shear",
        {
            "equation": eq,
            "unknowns": ["u", "v", "p"],
            "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
            "time": [0.0, 1.0],
            "boundary": "dirichlet",
        },
        [y, sp.Integer(0)],
        sp.Integer(0),
        0.0,
        [sp.Integer(0), sp.Integer(0)],
        reg,
        {"t": 8, "x": 12, "y": 12},
    )


SH_PHI = [sp.sin(x + 2 * y + t), sp.cos(3 * x - y) * sp.exp(-t)]
SH_PSI = x * y


@pytest.mark.parametrize("eps", EPSILONS)
def test_euler_shear_flow_walls(eps: float) -> None:
    """Steady Euler shear flow (Drazin & Reid 1981, ch. 4), nu = 0, walls on every face."""
    flow = euler_shear()
    model = {"sup_abs_model_u": 1 + eps, "sup_abs_model_v": eps, "sup_abs_model_p": eps}
    doc, err = run(flow, SH_PHI, SH_PSI, eps, model, n_true=48)
    _check(flow, eps, doc, err)
    kappa = {c["symbol"]: c["value"] for c in doc["constants"]}["kappa(t)"]
    assert kappa == pytest.approx(0.5, rel=1e-9)  # sym grad u = [[0, 1/2], [1/2, 0]]


# ---------------------------------------------------------------- recognition and refusal
def _problem(equations: list[str], **extra: Any) -> dict[str, Any]:
    return {
        "equation": equations,
        "unknowns": ["u", "v", "p"],
        "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "parameters": {"nu": 0.1},
        **extra,
    }


def test_recognises_any_order_and_typing() -> None:
    """Equations and unknowns in another order, terms moved across '=', a body force."""
    spec = ProblemSpec.model_validate(
        {
            **_problem(
                [
                    "u_x + v_y = 0",
                    "-nu*v_xx - nu*v_yy + v_t + p_y + v*v_y + u*v_x = sin(x)*t",
                    "2*u_t = -2*(u*u_x + v*u_y) - 2*p_x + 2*nu*(u_yy + u_xx)",
                ]
            ),
            "unknowns": ["p", "v", "u"],
        }
    )
    classified = classify(spec)
    assert classified.family.id == "incompressible-navier-stokes"
    desc = classified.description()
    assert desc["velocity"] == {"x": "u", "y": "v"} and desc["pressure"] == "p"
    assert desc["divergence_equation"] == 1
    assert desc["body_force"]["y"] == "t*sin(x)"


@pytest.mark.parametrize(
    ("equations", "why"),
    [
        (
            [NS_2D[0], NS_2D[1], "p_t + u_x + v_y = 0"],  # artificial compressibility
            "first space derivatives",
        ),
        ([NS_2D[0], NS_2D[1], "u_x + v_y = 1"], "compressible"),
        (
            ["u_t + 2*u*u_x + v*u_y + p_x = nu*(u_xx + u_yy)", NS_2D[1], NS_2D[2]],
            "convective form",
        ),
        (["u_t + u*u_x + v*u_y + p_x = nu*u_xx", NS_2D[1], NS_2D[2]], "same nu"),
        ([NS_2D[0], "v_t + u*v_x + v*v_y + p_x = nu*(v_xx + v_yy)", NS_2D[2]], "p_x"),
    ],
)
def test_refuses_with_reason(equations: list[str], why: str) -> None:
    spec = ProblemSpec.model_validate(_problem(equations))
    with pytest.raises(ProblemNotCovered) as info:
        classify(spec)
    reason = info.value.reasons["incompressible-navier-stokes"]
    assert why in reason, reason


def test_negative_viscosity_refused() -> None:
    spec = ProblemSpec.model_validate({**_problem(NS_2D), "parameters": {"nu": -0.1}})
    with pytest.raises(ProblemNotCovered, match="ill-posed"):
        classify(spec)


@pytest.fixture
def client(tmp_path: Path) -> Iterator[InProcessClient]:
    store = open_store(f"sqlite:///{tmp_path}/ns.sqlite3")
    c = InProcessClient(build_app(Settings(database_url="unused"), store))
    yield c
    c.close()
    store.dispose()


def test_http_lists_keys_and_refuses_compressible(client: InProcessClient) -> None:
    """POST /v1/problems lists exactly the keys of a channel problem; a compressible
    constraint is a 422 problem_not_covered that says why."""
    problem = _problem(NS_2D, boundary={"x": "periodic", "y": "dirichlet"})
    r = client.post("/v1/problems", json={"problem": problem})
    assert r.status_code == 200, r.text
    body = r.json()
    assert body["family"] == "incompressible-navier-stokes"
    assert set(body["required_regularity"]) == {
        "sup_abs_u_x",
        "sup_abs_u_y",
        "sup_abs_v_x",
        "sup_abs_v_y",
        "sup_abs_u",
        "sup_abs_v",
        "sup_abs_model_u",
        "sup_abs_model_v",
        "sup_abs_p",
        "sup_abs_model_p",
        "sup_abs_model_u_y",
        "sup_abs_model_v_y",
    }
    assert body["components"] == ["interior", "initial", "boundary", "periodic", "periodic_x"]
    bad = _problem([NS_2D[0], NS_2D[1], "u_x + v_y = x"])
    r = client.post("/v1/problems", json={"problem": bad})
    assert r.status_code == 422
    err = r.json()
    assert err["code"] == "problem_not_covered"
    assert "incompressible-navier-stokes" in err["detail"]
    assert "compressible" in err["detail"]


def test_missing_pressure_bound_is_named() -> None:
    flow = taylor_green()
    spec = ProblemSpec.model_validate(flow.problem)
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified,
        {
            "problem_id": pid,
            "rule": "gauss-legendre",
            "points": {"t": 6, "x": 6, "y": 6},
            "panels": {},
        },
    )
    res = residuals(plan, flow, flow.velocity, flow.pressure)
    reg = {k: v for k, v in {**flow.regularity, **_tg_model(0.1)}.items() if k != "sup_abs_model_p"}
    with pytest.raises(RegularityError, match="sup_abs_model_p") as info:
        certify(classified, pid, plan, reg, res, None)
    assert info.value.code == "regularity_missing"
