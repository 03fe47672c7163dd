"""Certify one network through the service and compare with the true error.

* residuals from the network (exact derivatives by :func:`boundsvc.client.mlp.residual_fields`)
  at the nodes of the service's Gauss-Legendre plan, never at the training points;
* regularity of the exact solution from the problem module (documented per value), and the
  model quantities ``sup_abs_model_*`` from the network on a dense grid plus a 10 % margin
  (an ASSUMPTION: a grid maximum is not a certified supremum);
* the true error from the exact solution by an independent fine Gauss-Legendre rule
  (:func:`scipy.special.roots_legendre`: 200 x 200 nodes in space-time, 400 in x at each time;
  Navier-Stokes: 40 x 80 x 80 in space-time and 200 x 200 in space at each time, velocity only).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import sympy as sp
from scipy.special import roots_legendre

from boundsvc.client.mlp import MLP, residual_fields
from validation.closed_form._case import VectorFn
from validation.closed_form._runner import _columns, _periodic
from validation.problems import FlowProblem, Problem, Reg
from validation.service import Api

FloatArray = np.ndarray
MARGIN = 1.10
LIFTING = "boundary_t"
GRID_T, GRID_X = 201, 201
N_ST, N_X, N_T_ODE = 200, 400, 400


@dataclass
class Outcome:
    """One certificate and its comparison with the truth."""

    problem: Problem
    variant: str
    weights_key: str
    certificate: dict[str, Any]
    regularity: dict[str, float | str]
    notes: dict[str, str]
    true_space_time: float | None
    true_final_time: float | None
    true_profile: list[float | None]
    meta: dict[str, Any]
    failures: list[str] = field(default_factory=list)
    #: steady problems: the true L2 error in space (the other true errors are None)
    true_space: float | None = None

    @property
    def status(self) -> str:
        return str(self.certificate["status"])

    def bound(self, which: str) -> float | None:
        v = (self.certificate.get("bound") or {}).get(which)
        return float(v) if isinstance(v, int | float) else None

    def effectivity(self, which: str | None = None) -> float | None:
        """``bound / true error``; default: space-time (steady problems: ``l2_space``)."""
        which = which or ("l2_space" if self.problem.is_steady else "l2_space_time")
        b = self.bound(which)
        truths = {
            "l2_space_time": self.true_space_time,
            "l2_final_time": self.true_final_time,
            "l2_space": self.true_space,
        }
        e = truths.get(which)
        return b / e if b is not None and e else None

    @property
    def ok(self) -> bool:
        return not self.failures

    @property
    def lifted(self) -> bool:
        """The service reported the boundary-lifting estimate."""
        return any(c.get("name") == "boundary lifting" for c in self.certificate["constants"])


def _grid(problem: Problem, t_limit: float = math.inf) -> tuple[FloatArray, FloatArray | None]:
    t0, t1 = problem.time
    t1 = min(t1, t_limit - 1e-3 * (t1 - t0))
    tt = np.linspace(t0, t1, GRID_T if not problem.is_ode else 2001)
    if problem.is_ode:
        return tt, None
    return tt, np.linspace(*problem.space, GRID_X)


def _points(problem: Problem, t: FloatArray, x: FloatArray | None) -> FloatArray:
    if x is None:
        return t[:, None]
    tt, xx = np.meshgrid(t, x, indexing="ij")
    return np.column_stack([tt.ravel(), xx.ravel()])


def model_sups(
    problem: Problem,
    model: MLP,
    regularity: Mapping[str, Reg],
    *,
    time_varying: bool = True,
    t_limit: float = math.inf,
) -> tuple[dict[str, float | str], dict[str, str]]:
    """``sup_abs_model_*`` from the network on a dense grid, times 1.1 (an assumption).

    Where the exact solution's bound ``E(t)`` of the same quantity is time-varying (and
    ``time_varying``), the value sent is the envelope ``E(t) + c`` with the smallest ``c >= 0``
    such that ``E(t_i) + c >= 1.1 max_x |model field(t_i, x)|`` at every grid time ``t_i``.
    Past a blow-up time ``t_limit`` the grid stops (no bound is claimed there).
    """
    values: dict[str, float | str] = {}
    notes: dict[str, str] = {}
    if not problem.model_keys:
        return values, notes
    t, x = _grid(problem, t_limit)
    pts = _points(problem, t, x)
    names = sorted(set(problem.model_keys.values()))
    fields = residual_fields(model, pts, problem.axes, names, outputs=problem.outputs)
    where = f"{len(t)} x {len(x)} grid" if x is not None else f"{len(t)}-point grid"
    for key, name in problem.model_keys.items():
        per_t = np.abs(fields[name]).reshape(len(t), -1).max(axis=1)
        exact = regularity.get(key.replace("model_", ""))
        values[key], notes[key] = _envelope(
            per_t, t, exact if time_varying else None, f"max over the {where} of |{name}|"
        )
    return values, notes


def _envelope(
    per_t: FloatArray, t: FloatArray, exact: Reg | None, what: str
) -> tuple[float | str, str]:
    """The wire value of a model sup from its sampled maxima ``per_t`` at the grid times ``t``:
    ``1.1 x`` the maximum, or (``exact`` time-varying) the envelope ``E(t) + c``."""
    if exact is not None and exact.time_varying:
        c = max(0.0, float(np.max(MARGIN * per_t - exact.fn(t))))
        c = float(f"{c * (1 + 1e-9) + 1e-12:.6e}")
        return (
            f"({exact.value}) + {c:.6e}",
            f"ASSUMED: 1.1 x {what} of the network at each time, enveloped by the exact "
            f"bound + {c:.3g}",
        )
    v = float(f"{MARGIN * float(per_t.max()) * (1 + 1e-9):.6e}")
    return v, f"ASSUMED: 1.1 x {what} of the network"


def _component(plan: Mapping[str, Any], name: str) -> dict[str, Any] | None:
    return next((c for c in plan["components"] if c["name"] == name), None)


def _as_model_points(problem: Problem, comp: Mapping[str, Any]) -> FloatArray:
    pts = np.asarray(comp["points"], dtype=np.float64)
    axes = list(comp["axes"])
    cols = []
    for a in problem.axes:
        if a in axes:
            cols.append(pts[:, axes.index(a)])
        elif a == "t":
            cols.append(np.full(pts.shape[0], problem.time[0]))
        else:  # pragma: no cover - every component carries its space axes
            raise ValueError(f"component {comp['name']} lacks axis {a}")
    return np.column_stack(cols)


def _values(problem: Problem, model: MLP, pts: FloatArray) -> FloatArray:
    f = residual_fields(model, pts, problem.axes, problem.outputs, outputs=problem.outputs)
    return np.column_stack([f[o] for o in problem.outputs])


def residuals(problem: Problem, model: MLP, plan: Mapping[str, Any]) -> dict[str, FloatArray]:
    """Residual arrays in the plan's point order (interior, initial, boundary)."""
    out: dict[str, FloatArray] = {}
    interior = _as_model_points(problem, _component(plan, "interior") or {})
    f = residual_fields(model, interior, problem.axes, problem.fields, outputs=problem.outputs)
    r = np.column_stack(problem.operator(f))
    out["interior"] = r[:, 0] if r.shape[1] == 1 else r
    init = _component(plan, "initial")
    if init is not None:
        pts = _as_model_points(problem, init)
        if problem.is_ode:
            y0 = problem.initial(np.zeros(1))
            target = np.broadcast_to(y0, (pts.shape[0], len(problem.outputs)))
        else:
            target = problem.initial(pts[:, 1])[:, None]
        r0 = _values(problem, model, pts) - target
        out["initial"] = r0[:, 0] if r0.shape[1] == 1 else r0
    for name in ("initial_t", "initial_x"):  # wave family: at the points of `initial`
        comp = _component(plan, name)
        if comp is None:
            continue
        pts = _as_model_points(problem, comp)
        deriv = "u_" + name[-1]
        d = residual_fields(model, pts, problem.axes, (deriv,), outputs=problem.outputs)[deriv]
        # initial_t: u_model_t - v0 with v0 = u_t(t0, x); initial_x: d_x (u_model - u0); both
        # data derivatives of the closed form by the complex step (exact to rounding)
        h = 1e-20
        if name == "initial_t":
            target = problem.boundary_rate(pts[:, 0], pts[:, 1])
        else:
            target = np.imag(problem.exact(pts[:, 0], pts[:, 1] + 1j * h)) / h
        out[name] = np.asarray(d).reshape(-1) - np.asarray(target, dtype=np.float64)
    bnd = _component(plan, "boundary")
    if bnd is not None:
        pts = _as_model_points(problem, bnd)
        rb = _values(problem, model, pts)[:, 0] - problem.boundary(pts[:, 0], pts[:, 1])
        if problem.lift is not None:
            # hard constraint: u_model = g on the faces by construction; the two evaluations of
            # the data (lift vs closed form) differ by rounding only -- check, then send 0.0
            if float(np.max(np.abs(rb))) > 1e-12:
                raise AssertionError(f"{problem.key}: hard BC violated by {np.max(np.abs(rb))}")
            rb = np.zeros_like(rb)
        out["boundary"] = rb
    rate = _component(plan, LIFTING)
    if rate is not None:
        # d/dt (u_model - g) at the boundary points: the network's exact u_t, the data's
        # derivative by the complex step
        pts = _as_model_points(problem, rate)
        u_t = residual_fields(model, pts, problem.axes, ("u_t",), outputs=problem.outputs)["u_t"]
        rt = np.asarray(u_t).reshape(-1) - problem.boundary_rate(pts[:, 0], pts[:, 1])
        if problem.lift is not None:
            if float(np.max(np.abs(rt))) > 1e-10:
                raise AssertionError(
                    f"{problem.key}: hard BC rate violated by {np.max(np.abs(rt))}"
                )
            rt = np.zeros_like(rt)
        out[LIFTING] = rt
    return out


def _gl(n: int, lo: float, hi: float) -> tuple[FloatArray, FloatArray]:
    z, w = roots_legendre(n)
    return 0.5 * (hi - lo) * (z + 1) + lo, 0.5 * (hi - lo) * w


def true_errors(
    problem: Problem, model: MLP, profile_t: Sequence[float], t_limit: float = math.inf
) -> tuple[float | None, float | None, list[float | None]]:
    """True errors in the certificate's norms (space-time, final time, at each profile time).

    ``t_limit``: the exact solution exists only before it (blow-up); later times give None.
    """
    t0, t1 = problem.time

    def err(pts: FloatArray) -> FloatArray:
        if problem.is_ode:
            exact = problem.exact(pts[:, 0])
        else:
            exact = problem.exact(pts[:, 0], pts[:, 1])[:, None]
        return _values(problem, model, pts) - exact

    def at(tk: float) -> float:
        if problem.is_ode:
            return float(np.linalg.norm(err(np.array([[tk]]))[0]))
        xs, wx = _gl(N_X, *problem.space)
        e = err(np.column_stack([np.full_like(xs, tk), xs]))[:, 0]
        return float(math.sqrt(np.dot(wx, e * e)))

    profile = [at(float(tk)) if tk < t_limit else None for tk in profile_t]
    if t1 >= t_limit:
        return None, None, profile
    if problem.is_ode:
        ts, wt = _gl(N_T_ODE, t0, t1)
        e2 = np.sum(err(ts[:, None]) ** 2, axis=1)
        st = float(math.sqrt(np.dot(wt, e2)))
    else:
        ts, wt = _gl(N_ST, t0, t1)
        xs, wx = _gl(N_ST, *problem.space)
        pts = _points(problem, ts, xs)
        e2 = (err(pts)[:, 0] ** 2).reshape(N_ST, N_ST)
        st = float(math.sqrt(np.einsum("i,j,ij->", wt, wx, e2)))
    return st, at(t1), profile


def certify_network(
    api: Api,
    problem: Problem,
    model: MLP,
    *,
    variant: str = "default",
    weights_key: str | None = None,
    t_limit: float = math.inf,
    expect_valid: bool = True,
    lifting: bool = True,
    panels: Mapping[str, int] | None = None,
) -> Outcome:
    """Problem -> plan -> certificate for ``model``, then the comparison with the truth.

    ``lifting``: where the family offers the boundary lifting (``boundary_t`` among the
    problem's optional components), ask the plan for it and send ``d/dt`` of the boundary
    residual; the service reports the smaller of the lifted and the flux estimate.
    ``panels``: Gauss-Legendre panels per axis (default: the problem's ``panels``).
    """
    if problem.is_steady:
        return certify_steady(api, problem, model, weights_key=weights_key)
    if isinstance(problem, FlowProblem):
        return certify_flow(api, problem, model, weights_key=weights_key)
    info = api.problem(problem.problem)
    failures: list[str] = []
    if info["family"] != problem.family:
        failures.append(f"classified as {info['family']}, expected {problem.family}")
    optional = [LIFTING] if lifting and LIFTING in info.get("optional_components", []) else []
    plan = api.plan(
        info["problem_id"],
        problem.points,
        optional,
        problem.panels if panels is None else panels,
    )
    reg = problem.regularity if variant == "default" else problem.variants[variant]
    sups, notes = model_sups(
        problem, model, reg, time_varying=variant != "constant sups", t_limit=t_limit
    )
    regularity: dict[str, float | str] = {k: r.value for k, r in reg.items()} | sups
    notes = {k: r.note for k, r in reg.items()} | notes
    res = residuals(problem, model, plan)
    wkey = weights_key or problem.key
    cert = api.certify(
        info["problem_id"],
        plan["plan_id"],
        regularity,
        res,
        {
            "name": f"validation/{wkey}",
            "version": "1",
            "metadata": {"variant": variant, "lifting": bool(optional)},
        },
    )
    st, ft, prof = true_errors(problem, model, cert["time_profile"]["t"], t_limit)
    out = Outcome(
        problem, variant, wkey, cert, regularity, notes, st, ft, prof, dict(model.meta), failures
    )
    _check(out, expect_valid=expect_valid)
    return out


def exact_norm(problem: Problem, t_limit: float = math.inf) -> float | None:
    """``||u||`` of the exact solution over space-time (same quadrature as the true error)."""
    t0, t1 = problem.time
    if t1 >= t_limit:
        return None
    ts, wt = _gl(N_ST if not problem.is_ode else N_T_ODE, t0, t1)
    if problem.is_ode:
        return float(math.sqrt(np.dot(wt, np.sum(problem.exact(ts) ** 2, axis=1))))
    xs, wx = _gl(N_ST, *problem.space)
    tt, xx = np.meshgrid(ts, xs, indexing="ij")
    u2 = problem.exact(tt, xx) ** 2
    return float(math.sqrt(np.einsum("i,j,ij->", wt, wx, u2)))


def steady_residuals(
    problem: Problem, model: MLP, plan: Mapping[str, Any]
) -> dict[str, FloatArray]:
    """Steady problems: the interior residual and ``u_model - g`` at the plan's face nodes."""
    out: dict[str, FloatArray] = {}
    for name in ("interior", "boundary"):
        comp = _component(plan, name)
        if comp is None:
            continue
        pts = _as_model_points(problem, comp)
        if name == "interior":
            f = residual_fields(model, pts, problem.axes, problem.fields, outputs=problem.outputs)
            if problem.source_term is not None:
                f["f"] = np.asarray(problem.source_term(*pts.T), dtype=np.float64)
            out[name] = np.asarray(problem.operator(f)[0], dtype=np.float64).reshape(-1)
        else:
            out[name] = _values(problem, model, pts)[:, 0] - problem.exact(*pts.T)
    return out


def true_error_steady(problem: Problem, model: MLP) -> float:
    """``||u_model - u||_{L2(box)}`` by an independent tensor Gauss-Legendre rule
    (:func:`scipy.special.roots_legendre`; 400 nodes in 1-D, 200 per axis in 2-D)."""
    n = N_X if len(problem.axes) == 1 else N_ST
    rules = [_gl(n, lo, hi) for lo, hi in problem.box]
    grids = np.meshgrid(*(r[0] for r in rules), indexing="ij")
    pts = np.column_stack([g.ravel() for g in grids])
    w = np.ones(1)
    for r in rules:
        w = np.multiply.outer(w, r[1]).ravel()
    e = _values(problem, model, pts)[:, 0] - problem.exact(*pts.T)
    return float(math.sqrt(np.dot(w, e * e)))


def certify_steady(
    api: Api, problem: Problem, model: MLP, *, weights_key: str | None = None
) -> Outcome:
    """The steady path: no time axis, no regularity, only ``l2_space`` compared."""
    info = api.problem(problem.problem)
    failures: list[str] = []
    if info["family"] != problem.family:
        failures.append(f"classified as {info['family']}, expected {problem.family}")
    plan = api.plan(info["problem_id"], problem.points, [])
    res = steady_residuals(problem, model, plan)
    wkey = weights_key or problem.key
    regularity: dict[str, float | str] = {k: r.value for k, r in problem.regularity.items()}
    notes = {k: r.note for k, r in problem.regularity.items()}
    cert = api.certify(
        info["problem_id"],
        plan["plan_id"],
        regularity,
        res,
        {"name": f"validation/{wkey}", "version": "1", "metadata": {"variant": "default"}},
    )
    truth = true_error_steady(problem, model)
    out = Outcome(
        problem,
        "default",
        wkey,
        cert,
        regularity,
        notes,
        None,
        None,
        [],
        dict(model.meta),
        failures,
        truth,
    )
    if cert["status"] == "invalid-hypotheses":
        failures.append(f"invalid-hypotheses: {cert.get('warnings')}")
    if cert["status"] != "valid":
        failures.append(f"status {cert['status']}, expected valid")
    b = out.bound("l2_space")
    if b is None:
        failures.append("no l2_space bound")
    elif b < truth:
        failures.append(f"BOUND BELOW TRUE ERROR: l2_space bound {b:.6g} < true {truth:.6g}")
    return out


# -- Navier-Stokes (2-D: inputs t, x, y; outputs u, v, p) -------------------------------------
#: dense grid of the model sups: times x points per space axis (faces included)
NS_GRID_T, NS_GRID_S = 41, 101
#: the independent true-error rule: t x x x y over space-time, per axis in space at each time
NS_ST = (40, 80, 80)
NS_S = 200
_NS_DERIVS = {"periodic": ("u", "v", "p"), "periodic_x": ("u_x", "v_x", "p_x")}
_NS_DERIVS["periodic_y"] = ("u_y", "v_y", "p_y")


class _NetFn(VectorFn):
    """The network's fields ``names`` as a :class:`VectorFn` (``fn(t, x, y) -> (n, m)``), so
    the registry's periodic-face layout (:func:`validation.closed_form._runner._periodic`) is
    reused for the network."""

    def __init__(self, problem: Problem, model: MLP, names: Sequence[str]) -> None:
        self.exprs = tuple(sp.Symbol(n) for n in names)
        self.names = tuple(names)
        self.problem, self.model = problem, model

    def __call__(self, *cols: FloatArray) -> FloatArray:
        pts = np.column_stack(cols)
        p = self.problem
        f = residual_fields(self.model, pts, p.axes, self.names, outputs=p.outputs)
        return np.column_stack([f[n] for n in self.names])


def _flow_space(problem: FlowProblem, n: int) -> list[FloatArray]:
    return [np.linspace(lo, hi, n) for lo, hi in problem.space_box.values()]


def flow_model_sups(
    problem: FlowProblem,
    model: MLP,
    regularity: Mapping[str, Reg],
    *,
    n_t: int = NS_GRID_T,
    n_s: int = NS_GRID_S,
) -> tuple[dict[str, float | str], dict[str, str]]:
    """``sup_abs_model_*`` of a flow network on an ``n_t x n_s x n_s`` grid (faces included),
    times 1.1 and enveloped by the exact bound where that is time-varying (an ASSUMPTION, as
    :func:`model_sups`). The pressure is sent for the normalisation ``p - m(t)``, ``m(t)`` the
    midpoint of the sampled range at time ``t`` (docs/theory/navier-stokes.md allows any
    additive normalisation of each pressure): its sup is the half-range. The gradient sups are
    over the whole box, which dominates the sups over the walls or periodic faces needed."""
    t0, t1 = problem.time
    t = np.linspace(t0, t1, n_t)
    xs, ys = _flow_space(problem, n_s)
    tt, xx, yy = np.meshgrid(t, xs, ys, indexing="ij")
    pts = np.column_stack([tt.ravel(), xx.ravel(), yy.ravel()])
    names = sorted(set(problem.model_keys.values()))
    fields = residual_fields(model, pts, problem.axes, names, outputs=problem.outputs)
    where = f"{n_t} x {n_s} x {n_s} grid"
    values: dict[str, float | str] = {}
    notes: dict[str, str] = {}
    for key, name in problem.model_keys.items():
        per = fields[name].reshape(n_t, -1)
        if name == "p":
            per_t = (per.max(axis=1) - per.min(axis=1)) / 2
            what = f"half the range over the {where} of p (normalisation p - midrange(t))"
        else:
            per_t = np.abs(per).max(axis=1)
            what = f"max over the {where} of |{name}|"
        values[key], notes[key] = _envelope(
            per_t, t, regularity.get(key.replace("model_", "")), what
        )
    return values, notes


def flow_residuals(
    problem: FlowProblem, model: MLP, plan: Mapping[str, Any]
) -> dict[str, FloatArray]:
    """The residual rows of docs/api.md "Navier-Stokes layout": interior in equation order,
    initial/boundary ``u_model - data`` per unknown (pressure column 0), periodic mismatches
    of the values (pressure included) and of ``d/d axis`` (``periodic_<axis>``)."""
    case = problem.case
    assert case is not None
    t0 = problem.time[0]
    out: dict[str, FloatArray] = {}
    for comp in plan["components"]:
        name = comp["name"]
        if name == "interior":
            pts = _as_model_points(problem, comp)
            f = residual_fields(model, pts, problem.axes, problem.fields, outputs=problem.outputs)
            out[name] = np.column_stack(problem.operator(f))
        elif name in ("initial", "boundary"):
            pts = _as_model_points(problem, comp)
            r = _values(problem, model, pts) - problem.exact(*pts.T)
            r[:, 2] = 0.0  # the pressure column is not used (docs/api.md)
            out[name] = r
        elif name in _NS_DERIVS:
            raw = np.asarray(comp["points"], dtype=np.float64).reshape(len(comp["weights"]), -1)
            cols = _columns(case, comp["axes"], raw, t0)
            out[name] = _periodic(case, _NetFn(problem, model, _NS_DERIVS[name]), cols)
        else:
            raise NotImplementedError(f"{problem.key}: residual component {name!r}")
    return out


def flow_true_errors(
    problem: FlowProblem,
    model: MLP,
    profile_t: Sequence[float],
    *,
    n_st: tuple[int, int, int] = NS_ST,
    n_s: int = NS_S,
) -> tuple[float, float, list[float | None]]:
    """The velocity error ``||(u_model - u, v_model - v)||`` by independent tensor
    Gauss-Legendre rules (:func:`scipy.special.roots_legendre`): ``n_st`` nodes in
    ``t x x x y`` over space-time, ``n_s x n_s`` in space at the final time and at every profile
    time. The pressure error is not compared (the family does not bound it)."""
    box = list(problem.space_box.values())

    def err2(pts: FloatArray) -> FloatArray:
        e = _values(problem, model, pts)[:, :2] - problem.exact(*pts.T)[:, :2]
        return np.asarray(np.sum(e * e, axis=1))

    (xs, wx), (ys, wy) = _gl(n_s, *box[0]), _gl(n_s, *box[1])
    gx, gy = np.meshgrid(xs, ys, indexing="ij")
    wxy = np.outer(wx, wy).ravel()

    def at(tk: float) -> float:
        pts = np.column_stack([np.full(gx.size, tk), gx.ravel(), gy.ravel()])
        return float(math.sqrt(np.dot(wxy, err2(pts))))

    ts, wt = _gl(n_st[0], *problem.time)
    (xs2, wx2), (ys2, wy2) = _gl(n_st[1], *box[0]), _gl(n_st[2], *box[1])
    g = np.meshgrid(ts, xs2, ys2, indexing="ij")
    w = np.einsum("i,j,k->ijk", wt, wx2, wy2).ravel()
    st = float(math.sqrt(np.dot(w, err2(np.column_stack([a.ravel() for a in g])))))
    return st, at(problem.time[1]), [at(float(tk)) for tk in profile_t]


def certify_flow(
    api: Api,
    problem: FlowProblem,
    model: MLP,
    *,
    weights_key: str | None = None,
    grid: tuple[int, int] = (NS_GRID_T, NS_GRID_S),
    n_st: tuple[int, int, int] = NS_ST,
    n_s: int = NS_S,
) -> Outcome:
    """The Navier-Stokes path of :func:`certify_network`: problem -> plan (the problem's
    required components) -> residuals from the network -> certificate, then the velocity error
    by the independent rule; the same failure checks."""
    info = api.problem(problem.problem)
    failures: list[str] = []
    if info["family"] != problem.family:
        failures.append(f"classified as {info['family']}, expected {problem.family}")
    plan = api.plan(info["problem_id"], problem.points, [])
    reg = problem.regularity
    sups, notes = flow_model_sups(problem, model, reg, n_t=grid[0], n_s=grid[1])
    regularity: dict[str, float | str] = {k: r.value for k, r in reg.items()} | sups
    notes = {k: r.note for k, r in reg.items()} | notes
    res = flow_residuals(problem, model, plan)
    wkey = weights_key or problem.key
    cert = api.certify(
        info["problem_id"],
        plan["plan_id"],
        regularity,
        res,
        {"name": f"validation/{wkey}", "version": "1", "metadata": {"variant": "default"}},
    )
    st, ft, prof = flow_true_errors(problem, model, cert["time_profile"]["t"], n_st=n_st, n_s=n_s)
    out = Outcome(
        problem, "default", wkey, cert, regularity, notes, st, ft, prof, dict(model.meta), failures
    )
    _check(out, expect_valid=True)
    return out


def _check(out: Outcome, *, expect_valid: bool) -> None:
    """The failures of a time-dependent certificate against its true errors (appended)."""
    cert, failures = out.certificate, out.failures
    status = cert["status"]
    if status == "invalid-hypotheses":
        failures.append(f"invalid-hypotheses: {cert.get('warnings')}")
    if expect_valid and status != "valid":
        failures.append(f"status {status}, expected valid")
    for which, truth in (
        ("l2_space_time", out.true_space_time),
        ("l2_final_time", out.true_final_time),
    ):
        b = out.bound(which)
        if b is not None and truth is not None and b < truth:
            failures.append(f"BOUND BELOW TRUE ERROR: {which} bound {b:.6g} < true {truth:.6g}")
    for tk, bk, ek in zip(
        cert["time_profile"]["t"],
        cert["time_profile"]["l2_error_bound"],
        out.true_profile,
        strict=True,
    ):
        if bk is not None and ek is not None and bk < ek:
            failures.append(f"BOUND BELOW TRUE ERROR at t = {tk:.6g}: {bk:.6g} < {ek:.6g}")
