"""Linear advection-diffusion-reaction, constant or variable coefficients (heat equation included).

    u_t + sum_i a_i(x, t) u_{x_i} - sum_i k_i(x, t) u_{x_i x_i} + c(x, t) u = s(x, t)

on ``[t0, T] x box`` (1 to 3 axes), Dirichlet or periodic per axis. The derivation is in
``docs/theory/advection-diffusion.md``: with ``w = u_model - u`` and ``R`` the interior residual,
``L w = R``; multiplying by ``w`` and integrating by parts gives, for ``Y = ||w||^2``,

    Y' <= (lambda + sup_x q(x, t) - F(t)) Y + ||R||^2 / lambda + B(t),
    q = div a - 2 c + sum_{i: Young} (d_i k_i)^2 / (2 theta_i k_i) + sum_{i: by parts} d_ii k_i,

``F`` the Friedrichs decay of the axes on which the model satisfies the boundary condition
exactly and ``B`` the boundary fluxes (Dirichlet faces: ``-(a.n) R_b^2``, ``2 k_i |R_b| (G_u +
G_m)``; periodic faces: mismatch terms). The sup of ``q`` over space is certified by interval
branch and bound (piecewise in time when the coefficients depend on ``t``). Then Gronwall.
References: the energy method for parabolic equations (Evans, "Partial Differential Equations",
2nd ed. 2010, sec. 7.1.2); residual-based error bounds for PINNs (Mishra & Molinaro, IMA J.
Numer. Anal. 43 (2023) 1-43, the stability-plus-residual framework).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np
import sympy
from scipy.interpolate import BarycentricInterpolator

from boundsvc.errors import RegularityError
from boundsvc.expr import Namespace, to_latex, to_text
from boundsvc.families._analysis import AnalysedProblem, exact
from boundsvc.families._base import (
    CertifyInputs,
    Classified,
    ConstantInfo,
    EnergyInequality,
    Family,
    FloatArray,
    NormAddition,
    Requirement,
    Rigor,
    SourceInfo,
)
from boundsvc.families._common import best_of, data_contradictions, evaluate_on, gradient_keys
from boundsvc.families._dual import dual_norm_squared
from boundsvc.families._linear import affine_split, field_names, foreign_field_names
from boundsvc.gronwall import Rate, output_times, panel_polynomial
from boundsvc.intervals import IntervalError, certified_max
from boundsvc.quadrature import (
    Plan,
    TimeGrid,
    face_slice_integrals,
    slice_integrals,
    total_integral,
)
from boundsvc.regularity import RegularityValue

REFERENCE = (
    "Energy method: L. C. Evans, Partial Differential Equations, 2nd ed., AMS 2010, sec. 7.1.2; "
    "residual stability framework: S. Mishra, R. Molinaro, IMA J. Numer. Anal. 43 (2023) 1-43; "
    "Gronwall: T. H. Gronwall, Ann. Math. 20 (1919) 292-296."
)
INTERVAL_REFERENCE = (
    "R. E. Moore, R. B. Kearfott, M. J. Cloud, Introduction to Interval Analysis, SIAM 2009"
)
FRIEDRICHS_REFERENCE = (
    "Friedrichs inequality on an interval, ||v|| <= (L/pi) ||v'|| for v(0) = v(L) = 0 (first "
    "Dirichlet eigenvalue); e.g. Evans 2010, sec. 5.8 and 6.5"
)
MAX_TIME_PIECES = 12
_SUP_BOXES = 600
_PIECE_BOXES = 120


# ------------------------------------------------------------------ shared certified tools
Box = dict[sympy.Symbol, tuple[float, float]]


def space_time_box(problem: AnalysedProblem, time: tuple[float, float] | None = None) -> Box:
    """The closed space-time box of the problem in internal symbols (time optional)."""
    ns = problem.namespace
    box: Box = {
        ns.coordinate(a): (float(lo), float(hi)) for a, (lo, hi) in problem.domain.space.items()
    }
    span = time if time is not None else problem.domain.time
    if span is not None:
        box[ns.coordinate("t")] = (float(span[0]), float(span[1]))
    return box


def certified_sup(
    expr: sympy.Expr, box: Mapping[sympy.Symbol, tuple[float, float]], boxes: int = _SUP_BOXES
) -> float:
    """Certified upper bound of ``sup expr`` over the box, splitting only the axes it uses."""
    used = {s: r for s, r in box.items() if s in expr.free_symbols}
    return certified_max(expr, used, max_boxes=boxes, rel_tol=1e-4)


def certified_inf(
    expr: sympy.Expr, box: Mapping[sympy.Symbol, tuple[float, float]], boxes: int = _SUP_BOXES
) -> float:
    """Certified lower bound of ``inf expr`` over the box."""
    return -certified_sup(-expr, box, boxes)


def time_pieces(grid: TimeGrid, max_pieces: int = MAX_TIME_PIECES) -> FloatArray:
    """Breakpoints for a piecewise-constant rate: a subset of the Gronwall output times.

    The propagation integrates the rate between consecutive output times, so a rate that is
    constant between these breakpoints is integrated exactly (no jump inside a quadrature)."""
    times, _, _ = output_times(grid)
    if times.size - 1 <= max_pieces:
        return times
    step = math.ceil((times.size - 1) / max_pieces)
    idx = [*range(0, times.size - 1, step), times.size - 1]
    return times[np.array(sorted(set(idx)))]


def piecewise_rate(edges: FloatArray, values: FloatArray) -> Rate:
    """The rate equal to ``values[j]`` on ``[edges[j], edges[j+1]]`` (max of both at a break)."""
    if values.size == 1 or np.all(values == values[0]):
        return Rate(constant=float(values[0]))
    e = np.asarray(edges, dtype=np.float64).copy()
    v = np.asarray(values, dtype=np.float64).copy()

    def rate(t: FloatArray) -> FloatArray:
        tt = np.asarray(t, dtype=np.float64)
        right = np.clip(np.searchsorted(e, tt, side="right") - 1, 0, v.size - 1)
        left = np.clip(np.searchsorted(e, tt, side="left") - 1, 0, v.size - 1)
        return np.maximum(v[right], v[left])

    return Rate(function=rate)


def exact_boundary_axes(
    problem: AnalysedProblem, plan: Plan, residuals: Mapping[str, FloatArray]
) -> tuple[str, ...]:
    """Dirichlet axes whose boundary residual is exactly 0.0 at every sample of both faces."""
    bnd = plan.components.get("boundary")
    if bnd is None or "boundary" not in residuals or bnd.face_index is None:
        return ()
    rb = residuals["boundary"]
    out = []
    for axis in problem.domain.dirichlet_axes:
        faces = [i for i, f in enumerate(bnd.faces) if f.axis == axis]
        mask = np.isin(bnd.face_index, faces)
        if faces and np.any(mask) and np.all(rb[mask] == 0.0):
            out.append(axis)
    return tuple(out)


def offending_term(expr: sympy.Expr, gens: Sequence[sympy.Symbol], ns: Namespace) -> str:
    """The first term of ``expr`` that is not affine in ``gens``, in the user's names."""
    for term in sympy.Add.make_args(sympy.expand(expr)):
        present = [g for g in gens if term.has(g)]
        if len(present) > 1 or (present and sympy.diff(term, present[0], 2) != 0):
            return to_text(term, ns)
        if present and sympy.diff(term, present[0]).has(present[0]):
            return to_text(term, ns)  # pragma: no cover - caught by the line above
    return to_text(expr, ns)


def friedrichs_warning(axes: Sequence[str]) -> str:
    return (
        "the boundary residual is exactly 0 at every sample of the faces normal to "
        f"{', '.join(axes)}: the model is taken to satisfy the Dirichlet condition exactly "
        "there (hard constraint), and the Friedrichs inequality ||w|| <= (L/pi) ||w_x|| adds "
        "a decay to the rate; if the model does not satisfy the boundary condition exactly "
        "between the samples, this certificate is not valid"
    )


def dirichlet_terms(
    problem: AnalysedProblem,
    plan: Plan,
    residuals: Mapping[str, FloatArray],
    regularity: Mapping[str, RegularityValue],
    advection: Mapping[str, sympy.Expr],
    diffusion: Mapping[str, sympy.Expr],
    diffusivity_gradient: Mapping[str, sympy.Expr],
    info: dict[str, SourceInfo],
) -> dict[str, FloatArray]:
    """Dirichlet face fluxes per time node: ``-(a.n + (d_i k_i) n_i) R_b^2`` (signed) and
    ``2 k_i |R_b| (G_u,i + G_m,i)``. ``diffusivity_gradient`` lists the axes treated by parts."""
    grid = plan.time
    assert grid is not None
    n_t, times = grid.size, grid.nodes
    bnd = plan.components["boundary"]
    rb = residuals["boundary"]
    assert bnd.face_index is not None
    dim = problem.domain.dimension
    axes = list(bnd.axes)
    normal_speed = np.zeros(bnd.size)
    gradient_speed = np.zeros(bnd.size)
    diff_values = np.zeros(bnd.size)
    for f, face in enumerate(bnd.faces):
        mask = bnd.face_index == f
        pts = bnd.points[mask]
        a_i = advection.get(face.axis, sympy.Integer(0))
        if a_i != 0:
            normal_speed[mask] = face.outward_sign * evaluate_on(a_i, problem, axes, pts)
        dk = diffusivity_gradient.get(face.axis, sympy.Integer(0))
        if dk != 0:
            gradient_speed[mask] = face.outward_sign * evaluate_on(dk, problem, axes, pts)
        k_i = diffusion.get(face.axis, sympy.Integer(0))
        if k_i != 0:
            diff_values[mask] = evaluate_on(k_i, problem, axes, pts)
    out: dict[str, FloatArray] = {}
    sq = np.square(rb)
    if np.any(normal_speed != 0):
        adv = face_slice_integrals(bnd, -normal_speed * sq, n_t).sum(axis=0)
        if np.any(adv != 0):
            out["boundary_advective"] = adv
            info["boundary_advective"] = SourceInfo(
                "boundary advective flux",
                "-int (a.n) R_b^2",
                "-int_F (a.n) R_b(t)^2",
                "heuristic",
                "signed: outflow faces reduce the bound",
            )
    if np.any(gradient_speed != 0):
        grad = face_slice_integrals(bnd, -gradient_speed * sq, n_t).sum(axis=0)
        if np.any(grad != 0):
            out["boundary_diffusivity_gradient"] = grad
            info["boundary_diffusivity_gradient"] = SourceInfo(
                "boundary flux of the diffusivity gradient",
                "-int (d_i k_i) n_i R_b^2",
                "-int_F (d_i k_i) n_i R_b(t)^2",
                "heuristic",
                "signed; from integrating (d_i k_i) w w_i by parts",
            )
    if np.any(diff_values != 0):
        per_face = face_slice_integrals(bnd, diff_values * np.abs(rb), n_t)
        dif = np.zeros(n_t)
        for f, face in enumerate(bnd.faces):
            if not np.any(per_face[f]):
                continue
            g_u = best_of(regularity, gradient_keys(face.axis, False, dim), times)
            g_m = best_of(regularity, gradient_keys(face.axis, True, dim), times)
            if g_u is None or g_m is None:
                raise RegularityError(
                    "regularity_missing",
                    f"the boundary residual on the faces normal to {face.axis} is not zero, so "
                    f"the bound needs sup_abs_u_{face.axis} and sup_abs_model_u_{face.axis}",
                    f"regularity.sup_abs_u_{face.axis}",
                )
            dif += 2 * per_face[f] * (g_u[0] + g_m[0])
        if np.any(dif != 0):
            out["boundary_diffusive"] = dif
            info["boundary_diffusive"] = SourceInfo(
                "boundary diffusive flux",
                "2 k int |R_b| (G_u + G_m)",
                "2 int_F k_i |R_b(t)| (G_u_i(t) + G_model_u_i(t))",
                "heuristic",
                "rests on the asserted gradient bounds (assumed) and the quadrature",
            )
    return out


def periodic_terms(
    problem: AnalysedProblem,
    axis: str,
    inputs: CertifyInputs,
    advection: sympy.Expr,
    diffusion: sympy.Expr,
    info: dict[str, SourceInfo],
    warnings: list[str],
) -> dict[str, FloatArray]:
    """Mismatch terms of the pair of faces normal to a periodic axis (coefficients of that axis
    do not depend on its coordinate, so they agree on both faces)."""
    plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
    grid = plan.time
    assert grid is not None
    times = grid.nodes
    n_t = times.size
    dim = problem.domain.dimension
    comp = plan.components["periodic"]
    assert comp.face_index is not None
    mask = comp.face_index == [f.axis for f in comp.faces].index(axis)
    p0 = np.where(mask, res["periodic"], 0.0)
    p1_name = f"periodic_{axis}"
    p1 = np.where(mask, res[p1_name], 0.0) if p1_name in res else np.zeros_like(p0)
    if not np.any(p0) and not np.any(p1):
        warnings.append(
            f"the periodicity residuals along {axis} are zero at every sample; "
            "the model is taken to be exactly periodic along it"
        )
        return {}
    m = best_of(reg, ("sup_abs_u",), times)
    mm = best_of(reg, ("sup_abs_model_u",), times)
    if m is None or mm is None:
        raise RegularityError(
            "regularity_missing",
            f"the periodicity residuals along {axis} are not zero, so the "
            "bound needs sup_abs_u and sup_abs_model_u",
            "regularity.sup_abs_u",
        )
    big_m = m[0] + mm[0]
    pts_axes = list(comp.axes)
    a_abs = (
        np.abs(evaluate_on(advection, problem, pts_axes, comp.points))
        if advection != 0
        else np.zeros(comp.size)
    )
    k_val = (
        evaluate_on(diffusion, problem, pts_axes, comp.points)
        if diffusion != 0
        else np.zeros(comp.size)
    )
    sl = face_slice_integrals(comp, a_abs * np.abs(p0), n_t).sum(axis=0)
    # -a_i (w_hi^2 - w_lo^2) = -a_i P0 (w_hi + w_lo);  |w_hi + w_lo| <= 2 (M_u + M_model)
    term = 2 * big_m * sl
    if np.any(k_val != 0):
        g_u = best_of(reg, gradient_keys(axis, False, dim), times)
        g_m = best_of(reg, gradient_keys(axis, True, dim), times)
        if np.any(p0) and (g_u is None or g_m is None):
            raise RegularityError(
                "regularity_missing",
                f"the periodicity residuals along {axis} are not zero, so "
                f"the bound needs sup_abs_u_{axis} and sup_abs_model_u_{axis}",
                f"regularity.sup_abs_u_{axis}",
            )
        grad = (g_u[0] + g_m[0]) if g_u is not None and g_m is not None else np.zeros(n_t)
        k1 = face_slice_integrals(comp, k_val * np.abs(p1), n_t).sum(axis=0)
        k0 = face_slice_integrals(comp, k_val * np.abs(p0), n_t).sum(axis=0)
        # 2 k [w w_x]_lo^hi = 2 k (w_hi P1 + w_x,lo P0)
        term = term + 2 * (big_m * k1 + grad * k0)
    name = f"periodic_{axis}_mismatch"
    info[name] = SourceInfo(
        f"periodicity mismatch along {axis}",
        f"P_{axis}(t)",
        "2 int |a_i| M |P0| + 2 int k_i (M |P1| + G |P0|)",
        "heuristic",
        "rests on sup bounds (assumed) and the quadrature",
    )
    return {name: term}


# ------------------------------------------------------------ boundary lifting (1-D Dirichlet)
LIFTING_REFERENCE = (
    "Lifting of Dirichlet data (subtract an extension of the boundary values, solve with zero "
    "trace): L. C. Evans, Partial Differential Equations, 2nd ed., AMS 2010, sec. 5.5 and 7.1; "
    "J.-L. Lions, E. Magenes, Non-Homogeneous Boundary Value Problems and Applications I, "
    "Springer 1972, ch. 1 and 4; residual bounds in semigroup form with a lifted boundary "
    "residual: B. Hillebrecht, B. Unger, arXiv 2210.03426 (2022)"
)
LIFTING_COMPONENT = "boundary_t"
# the initial value of a 1-D lifted estimate (linear and semilinear families)
LIFTED_INITIAL_INFO = SourceInfo(
    "initial residual of the lifted error",
    "(||R_0|| + ||B r(t0)||)^2",
    "||v(t0)|| <= ||u_model(., t0) - u0|| + sqrt(L/3 (r_a^2 + r_a r_b + r_b^2))(t0)",
    "heuristic",
    "quadrature of the initial residual; r(t0) from the time interpolant of the boundary residual",
)
# boundary_t is refused (the flux estimate is used) when it differs from the derivative of the
# time interpolant of the boundary residual by more than this share of their magnitude
LIFTING_RATE_TOLERANCE = 0.05


def lifting_constant(
    steps: Sequence[str], b_norm: FloatArray, lb_norm: FloatArray, operator: str
) -> ConstantInfo:
    """The ``boundary lifting`` constant of a 1-D lifted estimate: ``B r`` and its derivation
    (``steps``, family-specific), closed by the largest ``||B r||`` and ``||<operator> B r||``
    over the time nodes."""
    return ConstantInfo(
        name="boundary lifting",
        symbol="B r",
        expression="B r(x, t) = r_a(t) (b - x)/L + r_b(t) (x - a)/L",
        latex=r"B r = r_a(t)\,\frac{b-x}{L} + r_b(t)\,\frac{x-a}{L}",
        derivation=(
            *steps,
            f"largest ||B r|| at the nodes {float(np.max(b_norm)):.6g}, largest "
            f"||{operator} B r|| {float(np.max(lb_norm)):.6g}",
        ),
        reference=LIFTING_REFERENCE,
        value=float(np.max(b_norm)),
        rigor="proven",
    )


@dataclass(frozen=True)
class FaceTraces:
    """The boundary residual ``r`` and its time derivative ``r_t`` at the two ends of a 1-D
    interval (``low`` at ``x = a``, ``high`` at ``x = b``), at the plan's time nodes."""

    low: FloatArray
    high: FloatArray
    low_t: FloatArray
    high_t: FloatArray


def face_traces(plan: Plan, residuals: Mapping[str, FloatArray]) -> FaceTraces | str:
    """The traces of a 1-D plan's ``boundary`` and ``boundary_t`` residuals per face and time
    node, or the reason why the samples do not determine them."""
    bnd = plan.components.get("boundary")
    rate = plan.components.get(LIFTING_COMPONENT)
    grid = plan.time
    if bnd is None or rate is None or LIFTING_COMPONENT not in residuals or grid is None:
        return f"the plan or the residuals have no {LIFTING_COMPONENT!r} component"
    if bnd.face_index is None or bnd.time_index is None or len(bnd.faces) != 2:
        return "the boundary component does not consist of the two end points"
    if rate.points.shape != bnd.points.shape or not np.array_equal(rate.points, bnd.points):
        return f"the {LIFTING_COMPONENT!r} points are not the boundary points"
    n_t = grid.size
    key = bnd.face_index * n_t + bnd.time_index
    if np.any(np.bincount(key, minlength=2 * n_t) != 1):
        return "the boundary samples are not one point per end and time node"
    r = np.zeros((2, n_t))
    r_t = np.zeros((2, n_t))
    r[bnd.face_index, bnd.time_index] = residuals["boundary"]
    r_t[bnd.face_index, bnd.time_index] = residuals[LIFTING_COMPONENT]
    low = next(f for f, face in enumerate(bnd.faces) if face.side == "low")
    high = 1 - low
    return FaceTraces(r[low], r[high], r_t[low], r_t[high])


def lifting_norm(length: float, p: FloatArray, q: FloatArray) -> FloatArray:
    """``||p (b - x)/L + q (x - a)/L||_{L2(a, b)} = sqrt(L/3 (p^2 + p q + q^2))`` (exact)."""
    return np.sqrt(np.maximum(length / 3.0 * (p * p + p * q + q * q), 0.0))


def at_output_times(grid: TimeGrid, values: FloatArray) -> FloatArray:
    """Node values (rows: time nodes) at the Gronwall output times, interpolated exactly as
    the propagation interpolates its forcing (panel polynomial, or piecewise linear)."""
    times, is_node, panel_of = output_times(grid)
    out = np.zeros((times.size, values.shape[1]))
    if grid.mode == "linear":
        for k in range(values.shape[1]):
            out[:, k] = np.interp(times, grid.nodes, values[:, k])
    else:
        n = grid.nodes_per_panel
        for m in range(grid.edges.size - 1):
            sel = panel_of == m
            out[sel] = panel_polynomial(
                grid.nodes[m * n : (m + 1) * n], values[m * n : (m + 1) * n], times[sel]
            )
    node_rows = np.flatnonzero(is_node)
    out[node_rows] = values  # the nodes themselves, without interpolation round-off
    return out


def interpolant_rate(grid: TimeGrid, values: FloatArray) -> FloatArray:
    """Time derivative at the nodes of the same interpolant (to check ``boundary_t``)."""
    if grid.mode == "linear":
        return np.stack([np.gradient(values[:, k], grid.nodes) for k in range(values.shape[1])], 1)
    n = grid.nodes_per_panel
    out = np.zeros_like(values)
    for m in range(grid.edges.size - 1):
        xs = grid.nodes[m * n : (m + 1) * n]
        out[m * n : (m + 1) * n] = BarycentricInterpolator(
            xs, values[m * n : (m + 1) * n]
        ).derivative(xs)
    return out


def lifting_addition(grid: TimeGrid, length: float, r: FloatArray) -> NormAddition:
    """``||B r(t)||`` at the Gronwall output times and over space-time, for the triangle
    inequality ``||e|| <= ||v|| + ||B r||`` of a 1-D boundary lifting (``r``: rows = time
    nodes, columns = the ends ``a, b``)."""
    b_out = at_output_times(grid, r)
    b_nodes = lifting_norm(length, r[:, 0], r[:, 1])
    return NormAddition(
        profile=lifting_norm(length, b_out[:, 0], b_out[:, 1]),
        space_time=math.sqrt(float(np.dot(grid.weights, np.square(b_nodes)))),
        info=SourceInfo(
            "boundary lifting",
            "||B r(t)||",
            "sqrt(L/3 (r_a(t)^2 + r_a(t) r_b(t) + r_b(t)^2))",
            "heuristic",
            "closed form (exact) at the time nodes; between them the time interpolant "
            "of the boundary residual, and the time quadrature for the space-time norm",
        ),
    )


def rate_mismatch(grid: TimeGrid, r: FloatArray, r_t: FloatArray) -> str | None:
    """Why ``r_t`` (``boundary_t``) is not the time derivative of the interpolated boundary
    residual ``r`` (beyond LIFTING_RATE_TOLERANCE of their magnitude), or None if it is."""
    check = interpolant_rate(grid, r)
    scale = max(float(np.max(np.abs(check))), float(np.max(np.abs(r_t))))
    gap = float(np.max(np.abs(check - r_t)))
    if gap > LIFTING_RATE_TOLERANCE * scale + 1e-300:
        return (
            f"{LIFTING_COMPONENT} differs from the time derivative of the interpolated "
            f"boundary residual by {gap:.3g} (largest magnitude {scale:.3g}); it must be "
            "d/dt (u_model - g) at the boundary points"
        )
    return None


# ---------------------------------------------------------------------------- the family
class AdvectionDiffusionFamily(Family):
    """The linear advection-diffusion-reaction family (constant or variable coefficients)."""

    id = "linear-advection-diffusion-reaction"
    title = "Linear advection-diffusion-reaction (constant or variable coefficients)"
    equation_form = (
        "u_t + a(x,t).grad(u) - sum_i k_i(x,t) u_{x_i x_i} + c(x,t) u = s(x, t),  k_i >= 0"
    )
    hypotheses = (
        "The exact solution u is classical (C^1 in t, C^2 in x) on the closed domain.",
        "Dirichlet boundary: the boundary residual is u_model - u on the boundary, i.e. the "
        "boundary data equal the exact solution's trace on every boundary point.",
        "Regularity values bound |d u/d x_i| (and the model's) on the boundary faces at each time.",
        "Variable coefficients are C^1 in x (k_i C^2 where it is integrated by parts) on the "
        "closed box; their sup/inf are certified by interval arithmetic.",
        "Residual integrals are taken by the plan's quadrature (see each term's rigor).",
    )
    bounded_quantities = ("l2_space_time", "l2_final_time", "time_profile")
    reference = REFERENCE
    theory_document = "docs/theory/advection-diffusion.md"
    typical_regularity = ("sup_abs_u_x", "sup_abs_model_u_x")
    typical_optional = ("sup_grad_u", "sup_grad_model_u", "sup_abs_u", "sup_abs_model_u")
    typical_components = ("interior", "initial", "boundary")

    def recognise(self, problem: AnalysedProblem) -> Classified | str:
        if problem.is_steady:
            return "the problem is steady (no time interval); this family is time-dependent"
        if len(problem.unknowns) != 1:
            return "this family has a single unknown"
        ns = problem.namespace
        u = problem.unknowns[0]
        axes = problem.domain.space_axes
        if not axes:
            return "the problem has no space axes"
        gens = [ns.field(u, ("t",)), ns.field(u, ())]
        for a in axes:
            gens += [ns.field(u, (a,)), ns.field(u, (a, a))]
        expr = problem.numeric[0]
        others = foreign_field_names(expr, gens, ns)
        if others:
            names = ", ".join(others)
            return (
                f"the equation contains {names}; this family has u_t, first and pure second "
                "space derivatives only"
            )
        split = affine_split(expr, gens)
        if isinstance(split, str):
            return (
                "the equation is not linear in u and its derivatives (the term "
                f"{offending_term(expr, gens, ns)})"
            )
        coordinates = {ns.coordinate(c) for c in ("t", *axes)}
        for g, coeff in split.coefficients.items():
            if coeff.free_symbols - coordinates:
                return f"the coefficient of {ns.display_name(g)} is not a function of x and t"
        alpha = split.coefficients.get(gens[0], sympy.Integer(0))
        if alpha == 0:
            return "the equation has no time derivative u_t"
        if alpha.free_symbols:
            return (
                "the coefficient of u_t depends on "
                + ", ".join(sorted(ns.display_name(s) for s in alpha.free_symbols))
                + "; divide the equation by it (this family needs a constant coefficient of u_t)"
            )
        if split.remainder.free_symbols - coordinates:
            return "the source term depends on something other than x and t"

        def coefficient(g: sympy.Symbol, sign: int) -> sympy.Expr:
            return sympy.simplify(sign * split.coefficients.get(g, sympy.Integer(0)) / alpha)

        diffusion = {a: coefficient(ns.field(u, (a, a)), -1) for a in axes}
        advection = {a: coefficient(ns.field(u, (a,)), 1) for a in axes}
        reaction = coefficient(gens[1], 1)
        box = space_time_box(problem)
        for a in axes:
            reason = _check_diffusion(problem, a, diffusion[a], box)
            if reason is not None:
                return reason
        for name, value in (
            *((f"a_{a}", v) for a, v in advection.items()),
            ("c", reaction),
        ):
            if value.free_symbols:
                try:
                    certified_sup(sympy.Abs(value), box)
                except IntervalError as exc:
                    return (
                        f"the coefficient {name} = {to_text(value, ns)} cannot be bounded on the "
                        f"space-time box by interval arithmetic ({exc})"
                    )
        for a in problem.domain.periodic_axes:
            xa = ns.coordinate(a)
            for name, value in ((f"a_{a}", advection[a]), (f"k_{a}", diffusion[a])):
                if value.has(xa):
                    return (
                        f"the coefficient {name} = {to_text(value, ns)} depends on {a} along a "
                        f"periodic axis; the face terms need {name} equal on both faces "
                        "(not covered in this version)"
                    )
        symbolic = affine_split(problem.residuals[0], gens)
        assert not isinstance(symbolic, str)
        s_alpha = symbolic.coefficients.get(gens[0], sympy.Integer(1))
        return ClassifiedADR(
            family=self,
            problem=problem,
            alpha=alpha,
            advection=advection,
            diffusion=diffusion,
            reaction=reaction,
            symbolic_reaction=sympy.simplify(
                symbolic.coefficients.get(gens[1], sympy.Integer(0)) / s_alpha
            ),
            symbolic_diffusion={
                a: sympy.simplify(
                    -symbolic.coefficients.get(ns.field(u, (a, a)), sympy.Integer(0)) / s_alpha
                )
                for a in axes
            },
            symbolic_advection={
                a: sympy.simplify(
                    symbolic.coefficients.get(ns.field(u, (a,)), sympy.Integer(0)) / s_alpha
                )
                for a in axes
            },
            fields=field_names(expr, ns),
        )


def _check_diffusion(problem: AnalysedProblem, axis: str, k: sympy.Expr, box: Box) -> str | None:
    """Why a diffusion coefficient is not admissible (negative somewhere, or not boundable)."""
    ns = problem.namespace
    if not k.free_symbols:
        if k < 0:
            return (
                f"the diffusion coefficient along {axis} is {k} < 0 (backward diffusion): "
                "the problem is ill-posed"
            )
        return None
    try:
        low = certified_inf(k, box)
    except IntervalError as exc:
        return (
            f"the diffusion coefficient along {axis}, {to_text(k, ns)}, cannot be bounded on "
            f"the space-time box by interval arithmetic ({exc})"
        )
    if low >= 0:
        return None
    # find a witness: a point of the box where k < 0
    names = [s for s in box if s in k.free_symbols]
    # safe: parser-built expression in internal coordinate symbols only
    func = sympy.lambdify(names, k, modules="numpy")
    n = 41 if len(names) <= 2 else 13
    grids = np.meshgrid(*[np.linspace(*box[s], n) for s in names], indexing="ij")
    with np.errstate(all="ignore"):
        values = np.broadcast_to(np.asarray(func(*grids), dtype=np.float64), grids[0].shape)
    i = int(np.nanargmin(values))
    where = ", ".join(
        f"{ns.display_name(s)} = {float(g.ravel()[i]):.6g}"
        for s, g in zip(names, grids, strict=True)
    )
    if values.ravel()[i] < 0:
        return (
            f"the diffusion coefficient along {axis}, {to_text(k, ns)}, is negative in the "
            f"space-time box ({float(values.ravel()[i]):.6g} at {where}): backward diffusion "
            "is ill-posed"
        )
    return (
        f"the diffusion coefficient along {axis}, {to_text(k, ns)}, cannot be certified >= 0 "
        f"on the space-time box (certified lower bound {low:.6g}; smallest sampled value "
        f"{float(values.ravel()[i]):.6g} at {where}); backward diffusion would be ill-posed"
    )


@dataclass(frozen=True)
class _AxisTreatment:
    """How the non-divergence term (d_i k_i) w w_i of one axis is bounded."""

    kind: str  # "none" (k_i does not depend on x_i), "young", or "parts"
    theta: float  # share of the dissipation spent by Young (kind == "young")
    friedrichs: bool  # the remaining dissipation gives a Friedrichs decay


class ClassifiedADR(Classified):
    """A recognised linear advection-diffusion-reaction problem."""

    def __init__(
        self,
        *,
        family: Family,
        problem: AnalysedProblem,
        alpha: sympy.Expr,
        advection: dict[str, sympy.Expr],
        diffusion: dict[str, sympy.Expr],
        reaction: sympy.Expr,
        symbolic_reaction: sympy.Expr,
        symbolic_diffusion: dict[str, sympy.Expr],
        symbolic_advection: dict[str, sympy.Expr],
        fields: list[str],
    ) -> None:
        self.family = family
        self.problem = problem
        self.alpha = alpha
        self.a_expr = advection
        self.k_expr = diffusion
        self.c_expr = reaction
        self.variable = any(
            e.free_symbols for e in (*advection.values(), *diffusion.values(), reaction)
        )
        ns = problem.namespace
        self.sym_c = symbolic_reaction
        self.sym_k = symbolic_diffusion
        self.sym_a = symbolic_advection
        self.fields = fields
        self.box = space_time_box(problem)
        self.coord = {a: ns.coordinate(a) for a in problem.domain.space_axes}
        self.div_a = sympy.Add(*[sympy.diff(advection[a], x) for a, x in self.coord.items()])
        self.dk = {a: sympy.diff(diffusion[a], x) for a, x in self.coord.items()}
        self.dkk = {a: sympy.diff(self.dk[a], x) for a, x in self.coord.items()}
        # k_i certified bounds over the whole box (zero-order information for the classifier)
        self.k_inf = {
            a: (float(k) if not k.free_symbols else max(certified_inf(k, self.box), 0.0))
            for a, k in diffusion.items()
        }
        self.k_sup = {
            a: (float(k) if not k.free_symbols else certified_sup(k, self.box))
            for a, k in diffusion.items()
        }
        self._rate_cache: dict[
            tuple[object, ...],
            tuple[Rate, FloatArray, FloatArray, dict[str, _AxisTreatment], sympy.Expr],
        ] = {}
        self._treatment_cache: dict[tuple[str, ...], dict[str, _AxisTreatment]] = {}
        # constant-coefficient views (kept for the constant case and for display)
        self.c = float(reaction) if not reaction.free_symbols else math.nan
        self.k = self.k_sup
        self.a = {a: (float(v) if not v.free_symbols else math.nan) for a, v in advection.items()}

    # -- what the theorem needs ----------------------------------------------------------
    @property
    def _dim(self) -> int:
        return self.problem.domain.dimension

    def components(self) -> list[str]:
        names = ["interior", "initial"]
        if self.problem.domain.dirichlet_axes:
            names.append("boundary")
        if self.problem.domain.periodic_axes:
            names.append("periodic")
            for a in self.problem.domain.periodic_axes:
                if self.k_sup[a] > 0:
                    names.append(f"periodic_{a}")
        return names

    def optional_components(self) -> list[str]:
        """``boundary_t`` (d/dt of the boundary residual) enables the boundary lifting on a
        1-D Dirichlet interval."""
        domain = self.problem.domain
        if domain.dimension == 1 and domain.dirichlet_axes:
            return [LIFTING_COMPONENT]
        return []

    def requirements(self) -> list[Requirement]:
        reqs = []
        for a in self.problem.domain.dirichlet_axes:
            if self.k_sup[a] > 0:
                reqs.append(
                    Requirement(
                        gradient_keys(a, False, self._dim),
                        f"diffusive boundary flux on the faces normal to {a}",
                        f"sup over the boundary of |u_{a}| (exact solution)",
                    )
                )
                reqs.append(
                    Requirement(
                        gradient_keys(a, True, self._dim),
                        f"diffusive boundary flux on the faces normal to {a}",
                        f"sup over the boundary of |u_{a}| of the model",
                    )
                )
        return reqs

    def optional_keys(self) -> list[str]:
        keys: list[str] = []
        if self.problem.domain.periodic_axes:
            keys += ["sup_abs_u", "sup_abs_model_u"]
            for a in self.problem.domain.periodic_axes:
                if self.k_sup[a] > 0:
                    keys += [
                        k
                        for k in gradient_keys(a, False, self._dim)
                        + gradient_keys(a, True, self._dim)
                        if k not in keys
                    ]
        if self.problem.initial_values is not None or self.problem.boundary_value is not None:
            for k in ("sup_abs_u", "sup_abs_model_u"):
                if k not in keys:
                    keys.append(k)
        return keys

    def description(self) -> dict[str, object]:
        ns = self.problem.namespace
        return {
            "form": self.family.equation_form,
            "advection": {a: to_text(v, ns) for a, v in self.sym_a.items()},
            "diffusion": {a: to_text(v, ns) for a, v in self.sym_k.items()},
            "reaction": to_text(self.sym_c, ns),
            "time_derivative_coefficient": str(self.alpha),
            "variable_coefficients": self.variable,
            "boundary": dict(self.problem.domain.boundary),
            "fields": self.fields,
        }

    # -- the rate --------------------------------------------------------------------------
    def _treatments(self, exact_axes: Sequence[str]) -> dict[str, _AxisTreatment]:
        """Per axis: Young against the dissipation, or integration by parts, whichever has the
        smaller certified contribution (with the Friedrichs decay when it applies); cached."""
        key = tuple(exact_axes)
        if key not in self._treatment_cache:
            self._treatment_cache[key] = self._choose_treatments(exact_axes)
        return self._treatment_cache[key]

    def _choose_treatments(self, exact_axes: Sequence[str]) -> dict[str, _AxisTreatment]:
        out: dict[str, _AxisTreatment] = {}
        for a in self.coord:
            fried = a in exact_axes and self.k_inf[a] > 0
            b = 2 * self.k_inf[a] * (math.pi / self.problem.domain.length(a)) ** 2 if fried else 0.0
            if self.dk[a] == 0:
                out[a] = _AxisTreatment("none", 0.0, fried)
                continue
            candidates: list[tuple[float, _AxisTreatment]] = []
            try:
                parts = certified_sup(self.dkk[a], self.box)
                candidates.append((parts - b, _AxisTreatment("parts", 0.0, fried)))
            except IntervalError:
                pass
            if self.k_inf[a] > 0:
                try:
                    big_a = certified_sup(self.dk[a] ** 2 / (2 * self.k_expr[a]), self.box)
                except IntervalError:
                    big_a = math.inf
                if math.isfinite(big_a):
                    theta = min(1.0, math.sqrt(big_a / b)) if b > 0 else 1.0
                    theta = max(theta, 1e-6)
                    value = big_a / theta - (1 - theta) * b
                    candidates.append((value, _AxisTreatment("young", theta, fried and theta < 1)))
            if not candidates:
                raise RegularityError(
                    "problem_not_covered",
                    f"the derivative of the diffusion coefficient along {a} cannot be bounded "
                    "by interval arithmetic",
                    "problem.equation",
                )
            out[a] = min(candidates, key=lambda c: c[0])[1]
        return out

    def _q(self, treatments: Mapping[str, _AxisTreatment]) -> sympy.Expr:
        """The pointwise rate density q(x, t) (before the Friedrichs decay)."""
        q = self.div_a - 2 * self.c_expr
        for a, tr in treatments.items():
            if tr.kind == "young":
                q += self.dk[a] ** 2 / (2 * exact(tr.theta) * self.k_expr[a])
            elif tr.kind == "parts":
                q += self.dkk[a]
        return q

    def _rate(
        self, grid: TimeGrid, exact_axes: Sequence[str]
    ) -> tuple[Rate, FloatArray, FloatArray, dict[str, _AxisTreatment], sympy.Expr]:
        """The certified (piecewise constant) rate; cached per time grid and exact axes (the
        interval branch and bound is the slow part, and it depends on nothing else)."""
        key = (tuple(grid.edges.tolist()), grid.nodes_per_panel, tuple(exact_axes))
        if key not in self._rate_cache:
            self._rate_cache[key] = self._compute_rate(grid, exact_axes)
        return self._rate_cache[key]

    def _compute_rate(
        self, grid: TimeGrid, exact_axes: Sequence[str]
    ) -> tuple[Rate, FloatArray, FloatArray, dict[str, _AxisTreatment], sympy.Expr]:
        treatments = self._treatments(exact_axes)
        q = self._q(treatments)
        t_sym = self.problem.namespace.coordinate("t")
        depends_on_t = q.has(t_sym) or any(
            tr.friedrichs and self.k_expr[a].has(t_sym) for a, tr in treatments.items()
        )
        edges = time_pieces(grid) if depends_on_t else np.array([grid.t0, grid.t_end])
        values = np.zeros(edges.size - 1)
        for j in range(edges.size - 1):
            box = space_time_box(self.problem, (float(edges[j]), float(edges[j + 1])))
            try:
                value = certified_sup(q, box, _PIECE_BOXES) if q.free_symbols else float(q)
            except IntervalError as exc:
                raise RegularityError(
                    "problem_not_covered",
                    f"the rate density {to_text(q, self.problem.namespace)} cannot be bounded by "
                    f"interval arithmetic ({exc})",
                    "problem.equation",
                ) from exc
            for a, tr in treatments.items():
                if tr.friedrichs:
                    k_low = (
                        max(certified_inf(self.k_expr[a], box, _PIECE_BOXES), 0.0)
                        if self.k_expr[a].free_symbols
                        else float(self.k_expr[a])
                    )
                    share = 1.0 - tr.theta if tr.kind == "young" else 1.0
                    value -= 2 * share * k_low * (math.pi / self.problem.domain.length(a)) ** 2
            values[j] = value
        return piecewise_rate(edges, values), edges, values, treatments, q

    def constants(self) -> list[ConstantInfo]:
        ns = self.problem.namespace
        if not self.variable:
            c_text, c_latex = to_text(self.sym_c, ns), to_latex(self.sym_c, ns)
            if self.sym_c.is_Number:
                # a numeric reaction coefficient is folded in: "lambda - 2", never "lambda - 2*0"
                twice = sympy.nsimplify(2 * self.sym_c)
                if twice == 0:
                    rate_text, rate_latex = "lambda", r"\lambda"
                else:
                    sign = "-" if twice > 0 else "+"
                    mag = abs(twice)
                    rate_text = f"lambda {sign} {to_text(mag, ns)}"
                    rate_latex = rf"\lambda {sign} {to_latex(mag, ns)}"
            else:
                if not (self.sym_c.is_Symbol or self.sym_c.is_Function):
                    c_text, c_latex = f"({c_text})", rf"\left({c_latex}\right)"
                rate_text = f"lambda - 2*{c_text}"
                rate_latex = rf"\lambda - 2\,{c_latex}"
        else:
            q = self._q(self._treatments(()))
            rate_text = f"lambda + sup_x ({to_text(q, ns)})"
            rate_latex = rf"\lambda + \sup_x \left({to_latex(q, ns)}\right)"
        out = [
            ConstantInfo(
                name="growth rate of ||w||^2",
                symbol="a(t)",
                expression=rate_text,
                latex=rate_latex,
                derivation=(
                    "Multiply L w = R by w = u_model - u and integrate over the box.",
                    "a.grad(w) w = div(a w^2/2) - (div a) w^2/2: a boundary flux -(a.n) w^2/2 "
                    "and a rate (div a)/2 (zero for constant a).",
                    "-k_i w w_{x_i x_i} = k_i w_{x_i}^2 + (d_i k_i) w w_{x_i} "
                    "- (k_i w w_{x_i})_{x_i}: "
                    "dissipation, a non-divergence term (zero for k_i independent of x_i) and a "
                    "boundary flux k_i w w_{x_i} n_i.",
                    "Non-divergence term, either by Young: |d_i k_i w w_i| <= theta k_i w_i^2 + "
                    "(d_i k_i)^2 w^2/(4 theta k_i) (needs k_i >= k0 > 0), or by parts: "
                    "-2 (d_i k_i) w w_i = -((d_i k_i) w^2)_i + (d_ii k_i) w^2; the smaller "
                    "certified contribution is used.",
                    "2 (R, w) <= lambda ||w||^2 + ||R||^2 / lambda (Young, any lambda > 0).",
                    "Hence Y' <= (lambda + sup_x q - F) Y + ||R||^2/lambda + B(t), q = div a - 2c "
                    "+ (non-divergence terms); the remaining dissipation is dropped unless the "
                    "model satisfies the boundary condition exactly on an axis (F: Friedrichs, "
                    "2 (1-theta) inf k_i (pi/L_i)^2).",
                    "sup_x q and inf k_i are certified by interval branch and bound over the "
                    "space box, piecewise constant in time when the coefficients depend on t.",
                    "lambda is chosen per output to minimise the bound (every lambda > 0 "
                    "is valid).",
                ),
                reference=REFERENCE,
                rigor="proven",
            )
        ]
        for a in self.problem.domain.dirichlet_axes:
            ka = self.sym_k[a]
            out.append(
                ConstantInfo(
                    name=f"boundary factor on faces normal to {a}",
                    symbol=f"B_{a}(t)",
                    expression=(
                        f"-(a.n) int_F R_b^2 + 2*int_F ({to_text(ka, ns)})*|R_b| "
                        f"(G_u_{a}(t) + G_model_u_{a}(t))"
                    ),
                    latex=(
                        rf"-(a\cdot n)\int_F R_b^2 + 2\int_F ({to_latex(ka, ns)})\,|R_b|\,"
                        rf"(G_{{u,{a}}}(t) + G_{{u^*,{a}}}(t))"
                    ),
                    derivation=(
                        "On a Dirichlet face w = R_b (the boundary residual) is known exactly.",
                        f"|w_{a}| <= |u_{a}| + |u_model_{a}| <= G_u + G_model on the face.",
                        "The advective flux -(a.n) w^2 is kept with its sign (outflow faces help).",
                        "When d_i k_i is integrated by parts, -(d_i k_i) n_i R_b^2 is added "
                        "(signed).",
                    ),
                    reference=REFERENCE,
                    rigor="assumed" if self.k_sup[a] > 0 else "proven",
                )
            )
        return out

    def residual_scale(self) -> float:
        return 1.0 / float(self.alpha)

    # -- the inequality --------------------------------------------------------------------
    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        grid = plan.time
        assert grid is not None
        n_t = grid.size
        interior = plan.components["interior"]
        initial_c = plan.components["initial"]
        y0 = total_integral(initial_c, np.square(res["initial"]))
        residual = slice_integrals(interior, np.square(res["interior"]), n_t)
        forcing: dict[str, FloatArray] = {}
        info: dict[str, SourceInfo] = {}
        warnings: list[str] = []
        domain = self.problem.domain
        exact_axes = tuple(
            a for a in exact_boundary_axes(self.problem, plan, res) if self.k_inf[a] > 0
        )
        rate, edges, values, treatments, q = self._rate(grid, exact_axes)
        fried_axes = [a for a, tr in treatments.items() if tr.friedrichs]
        if fried_axes:
            warnings.append(friedrichs_warning(fried_axes))
        if "boundary" in plan.components and domain.dirichlet_axes:
            parts = {a: self.dk[a] for a, tr in treatments.items() if tr.kind == "parts"}
            forcing.update(
                dirichlet_terms(self.problem, plan, res, reg, self.a_expr, self.k_expr, parts, info)
            )
        for axis in domain.periodic_axes:
            forcing.update(
                periodic_terms(
                    self.problem,
                    axis,
                    inputs,
                    self.a_expr[axis],
                    self.k_expr[axis],
                    info,
                    warnings,
                )
            )
        constants = [c.with_value(None) for c in self.constants()]
        rate_rigor: Rigor = "assumed" if fried_axes else "proven"
        constants[0] = constants[0].with_value(float(np.max(values)), rate_rigor)
        constants.extend(self._rate_constants(edges, values, treatments, q, fried_axes))
        flux = EnergyInequality(
            base_rate=rate,
            initial=y0,
            initial_info=SourceInfo(
                "initial residual",
                "||R_0||^2",
                "int (u_model(x,t0) - u0)^2 dx",
                "heuristic",
                "quadrature of the initial residual",
            ),
            residual=residual,
            residual_info=SourceInfo(
                "interior residual",
                "||R||^2/lambda",
                "int_t0^t e^{A(s,t)} ||R(s)||^2 / lambda ds",
                "heuristic",
                "quadrature of the interior residual",
            ),
            forcing=forcing,
            forcing_info=info,
            nonnegative=("boundary_diffusive",),
            constants=constants,
            warnings=warnings,
            failed_hypotheses=data_contradictions(self.problem, plan, res, reg),
            rate_rigor=rate_rigor,
            inputs={"rate_max": float(np.max(values)), "rate_min": float(np.min(values))},
        )
        if LIFTING_COMPONENT in res:
            flux.label = "boundary flux estimate"
            lifted = self._lifted_inequality(inputs, y0, residual, flux.failed_hypotheses)
            if isinstance(lifted, str):
                flux.warnings.append(f"boundary lifting not used: {lifted}")
            else:
                flux.alternatives.append(lifted)
                twin = self._dual_twin(lifted, inputs, residual, lifted.lifting_residual)
                if twin is not None:
                    flux.alternatives.append(twin)
        zero_trace = (
            bool(domain.dirichlet_axes)
            and set(domain.dirichlet_axes) <= set(exact_axes)
            and not any(np.any(v) for v in forcing.values())
        )
        if zero_trace:
            # zero-trace error (exact Dirichlet data, no face term): the H^-1 estimate applies
            twin = self._dual_twin(flux, inputs, residual, None)
            if twin is not None:
                flux.label = flux.label or "L2 residual estimate"
                flux.alternatives.append(twin)
        return flux

    # -- the H^-1 residual estimate (1-D, zero-trace error) ---------------------------------
    def _dual_twin(
        self,
        base: EnergyInequality,
        inputs: CertifyInputs,
        residual: FloatArray,
        lb_norm: FloatArray | None,
    ) -> EnergyInequality | None:
        """``base`` with the interior residual measured in H^-1 instead of L2 (steps H1-H6 of
        docs/theory/advection-diffusion.md): ``2 (F, v) <= ||F||_{-1}^2/delta + delta ||v_x||^2``
        with ``delta`` taken out of the Friedrichs share of the dissipation, so the Young weight
        ``lambda = delta (pi/L)^2`` is capped at ``2 share k_inf (pi/L)^2``. None where it does
        not apply (several space axes, a non-tensor plan, no Friedrichs decay on the axis)."""
        domain = self.problem.domain
        plan = inputs.plan
        grid = plan.time
        if grid is None or len(domain.space_axes) != 1 or len(domain.dirichlet_axes) != 1:
            return None
        axis = domain.dirichlet_axes[0]
        treatments = self._treatments((axis,) if self.k_inf[axis] > 0 else ())
        tr = treatments.get(axis)
        if tr is None or not tr.friedrichs:
            return None
        length = domain.length(axis)
        interior = plan.components["interior"]
        values = np.asarray(inputs.residuals["interior"], dtype=np.float64)
        dual = dual_norm_squared(interior, values, grid.size, length)
        if dual is None or not np.all(np.isfinite(dual)):
            return None
        # the L2 quadrature allowance of this slice (upper limit minus the plain rule), carried
        # over through ||F||_{-1} <= (L/pi) ||F|| (Poincare, by duality)
        assert interior.slice_weights is not None
        plain = np.einsum(
            "ij,ij->i",
            interior.slice_weights.reshape(grid.size, -1),
            np.square(values).reshape(grid.size, -1),
        )
        poincare = (math.pi / length) ** 2
        scaled = poincare * np.maximum(dual, 0.0) + np.maximum(residual - plain, 0.0)
        # ||L B r||_{-1} <= (L/pi) ||L B r||: in the scaled units it enters as ||L B r||
        extra = np.zeros(grid.size) if lb_norm is None else lb_norm
        share = 1.0 - tr.theta if tr.kind == "young" else 1.0
        cap = 2.0 * share * self.k_inf[axis] * poincare
        if not cap > 0:
            return None
        what = "of the lifted error " if lb_norm is not None else ""
        return replace(
            base,
            residual=np.square(np.sqrt(scaled) + extra),
            residual_info=SourceInfo(
                f"interior residual {what}in H^-1",
                "(pi/L)^2 ||F||_{-1}^2/lambda, lambda <= 2 (1-theta) k_inf (pi/L)^2",
                "int_t0^t e^{A(s,t)} (pi/L)^2 ||F(s)||_{-1}^2 / lambda ds, "
                "||F||_{-1}^2 = int (Q - mean Q)^2, Q = int_a^x F",
                "heuristic",
                "per time node: the panel interpolant of the interior residual integrated once "
                "in the Legendre basis (exact for the interpolant), plus the L2 quadrature "
                "allowance; ||L B r|| by Poincare duality",
            ),
            young_cap=cap,
            alternatives=[],
            label=(base.label or "L2 residual estimate") + ", H^-1 residual",
            warnings=[
                *base.warnings,
                "H^-1 residual: the interior residual is measured in the dual norm of H^1_0 "
                "(the heat operator's smoothing of oscillating residuals is credited); the "
                f"Young weight is capped at {cap:.6g} (part of the Friedrichs decay is spent)",
            ],
        )

    # -- the boundary lifting (1-D Dirichlet) ------------------------------------------------
    def _lifted_inequality(
        self,
        inputs: CertifyInputs,
        y0: float,
        residual: FloatArray,
        failed: list[str],
    ) -> EnergyInequality | str:
        """The estimate for ``v = e - B r`` (zero trace) plus ``||B r||``: see the section
        "Boundary lifting" of docs/theory/advection-diffusion.md, steps L1-L8."""
        plan = inputs.plan
        grid = plan.time
        assert grid is not None
        if not self.optional_components():
            return "the lifting is implemented for one space axis with Dirichlet ends"
        traces = face_traces(plan, inputs.residuals)
        if isinstance(traces, str):
            return traces
        axis = self.problem.domain.dirichlet_axes[0]
        length = self.problem.domain.length(axis)
        r = np.stack([traces.low, traces.high], axis=1)
        r_t = np.stack([traces.low_t, traces.high_t], axis=1)
        refused = rate_mismatch(grid, r, r_t)
        if refused is not None:
            return refused
        exact_axes = (axis,) if self.k_inf[axis] > 0 else ()
        rate, edges, values, treatments, q = self._rate(grid, exact_axes)
        # L2: ||B r||, ||d_t B r|| at the time nodes (closed forms, exact)
        b_norm = lifting_norm(length, traces.low, traces.high)
        bt_norm = lifting_norm(length, traces.low_t, traces.high_t)
        # L3-L4: ||L B r|| (d_xx B r = 0: the diffusion coefficient does not enter)
        a_x, c = self.a_expr[axis], self.c_expr
        jump = (traces.high - traces.low) / length
        if not a_x.free_symbols and not c.free_symbols:
            a0, c0 = float(a_x), float(c)
            lb_norm = lifting_norm(
                length,
                traces.low_t + c0 * traces.low + a0 * jump,
                traces.high_t + c0 * traces.high + a0 * jump,
            )
            lb_text = "||L B r|| = sqrt(L/3 (P^2 + P Q + Q^2)), P, Q = r_t + c r + a (r_b - r_a)/L"
        else:
            a_sup = certified_sup(sympy.Abs(a_x), self.box) if a_x.free_symbols else abs(float(a_x))
            c_sup = certified_sup(sympy.Abs(c), self.box) if c.free_symbols else abs(float(c))
            lb_norm = bt_norm + a_sup * np.abs(jump) * math.sqrt(length) + c_sup * b_norm
            lb_text = (
                f"||L B r|| <= ||d_t B r|| + sup|a| |r_b - r_a|/sqrt(L) + sup|c| ||B r||, "
                f"certified sup|a| = {a_sup:.6g}, sup|c| = {c_sup:.6g}"
            )
        addition = lifting_addition(grid, length, r)
        b_profile = addition.profile
        # L5-L6: v(t0) = R_0 - B r(t0), L v = R - L B r
        initial = (math.sqrt(max(y0, 0.0)) + float(b_profile[0])) ** 2
        forcing_v = np.square(np.sqrt(np.maximum(residual, 0.0)) + lb_norm)
        fried = [a for a, tr in treatments.items() if tr.friedrichs]
        constants = [c_.with_value(None) for c_ in self.constants()]
        constants[0] = constants[0].with_value(float(np.max(values)), "proven")
        constants.extend(self._rate_constants(edges, values, treatments, q, ()))
        constants.append(self._lifting_constant(length, lb_text, b_norm, lb_norm, fried))
        return EnergyInequality(
            base_rate=rate,
            initial=initial,
            initial_info=LIFTED_INITIAL_INFO,
            residual=forcing_v,
            residual_info=SourceInfo(
                "interior residual of the lifted error",
                "(||R|| + ||L B r||)^2/lambda",
                "int_t0^t e^{A(s,t)} (||R(s)|| + ||L B r(s)||)^2 / lambda ds",
                "heuristic",
                "quadrature of the interior residual; ||L B r|| in closed form from the "
                "boundary residual and boundary_t at the time nodes",
            ),
            constants=constants,
            warnings=[
                "boundary lifting: e = v + B r with B r the linear interpolant of the boundary "
                "residual between the ends; v has zero trace, so the estimate for v has no "
                "boundary term and keeps the Friedrichs decay, and ||e|| <= ||v|| + ||B r||. "
                "It rests on boundary_t = d/dt (u_model - g) at the boundary points."
            ],
            failed_hypotheses=list(failed),
            rate_rigor="proven",
            inputs={"rate_max": float(np.max(values)), "rate_min": float(np.min(values))},
            lifting_residual=lb_norm,
            norm_addition=addition,
            label="boundary lifting",
        )

    def _lifting_constant(
        self,
        length: float,
        lb_text: str,
        b_norm: FloatArray,
        lb_norm: FloatArray,
        fried: Sequence[str],
    ) -> ConstantInfo:
        return lifting_constant(
            (
                "e = u_model - u has the trace r (boundary residual) at x = a, b; v = e - B r "
                "vanishes at both ends for every t.",
                "L v = R - L B r, v(t0) = R_0 - B r(t0).",
                f"||B r||^2 = L/3 (r_a^2 + r_a r_b + r_b^2) exactly (L = {length:.6g}); the same "
                "for d_t B r with r_t = boundary_t.",
                f"d_xx B r = 0, so the diffusion does not enter; {lb_text}.",
                "Energy estimate for v without boundary terms"
                + (
                    f"; the Friedrichs decay along {', '.join(fried)} holds (zero trace)."
                    if fried
                    else "."
                ),
                "Young with (||R|| + ||L B r||)^2/lambda, Gronwall, then ||e|| <= ||v|| + ||B r|| "
                "at each time and by Minkowski in space-time.",
            ),
            b_norm,
            lb_norm,
            "L",
        )

    def _rate_constants(
        self,
        edges: FloatArray,
        values: FloatArray,
        treatments: Mapping[str, _AxisTreatment],
        q: sympy.Expr,
        fried_axes: Sequence[str],
    ) -> list[ConstantInfo]:
        ns = self.problem.namespace
        out: list[ConstantInfo] = []
        if self.variable:
            lines = [f"q(x, t) = {to_text(q, ns)}"]
            for a, tr in treatments.items():
                if tr.kind == "young":
                    lines.append(
                        f"axis {a}: Young with theta = {tr.theta:.6g} against k_{a} "
                        f"(certified inf k_{a} = {self.k_inf[a]:.6g} > 0)"
                    )
                elif tr.kind == "parts":
                    lines.append(f"axis {a}: (d_{a} k_{a}) w w_{a} integrated by parts")
            lines.append(
                f"sup over space certified by interval branch and bound on {values.size} time "
                f"piece(s); largest {float(np.max(values)):.6g}, smallest "
                f"{float(np.min(values)):.6g}"
            )
            out.append(
                ConstantInfo(
                    name="certified sup of the rate density",
                    symbol="sup_x q",
                    expression="; ".join(
                        f"[{edges[j]:.6g}, {edges[j + 1]:.6g}]: {values[j]:.17g}"
                        for j in range(values.size)
                    ),
                    latex=r"\sup_x q(x,t)",
                    derivation=tuple(lines),
                    reference=INTERVAL_REFERENCE,
                    value=float(np.max(values)),
                    rigor="proven",
                )
            )
        if fried_axes:
            c_f = 1 / (
                math.pi * math.sqrt(sum(self.problem.domain.length(a) ** -2 for a in fried_axes))
            )
            out.append(
                ConstantInfo(
                    name="Friedrichs decay",
                    symbol="F",
                    expression=" + ".join(
                        f"2*(1 - theta_{a})*inf k_{a}*(pi/{self.problem.domain.length(a):.6g})^2"
                        for a in fried_axes
                    ),
                    latex=r"2\sum_i (1-\theta_i)\,\inf k_i\,(\pi/L_i)^2",
                    derivation=(
                        "w = 0 on the faces normal to each listed axis (boundary residual "
                        "exactly zero, taken as a hard constraint).",
                        "On every line parallel to x_i: ||w||^2 <= (L_i/pi)^2 ||w_{x_i}||^2 "
                        "(first Dirichlet eigenvalue), integrated over the other coordinates.",
                        "Hence sum_i 2 (1-theta_i) int k_i w_i^2 >= sum_i 2 (1-theta_i) inf k_i "
                        "(pi/L_i)^2 ||w||^2, at least 2 k_min / C_F^2 ||w||^2 with "
                        f"C_F = 1/(pi sqrt(sum_i L_i^-2)) = {c_f:.6g} for equal k_i.",
                    ),
                    reference=FRIEDRICHS_REFERENCE,
                    value=None,
                    rigor="assumed",
                )
            )
        return out
