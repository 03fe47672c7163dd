"""Incompressible Navier-Stokes and Euler equations in two and three space dimensions.

    u_t + (u.grad) u + beta grad p = nu Lap u + f(x, t),   div u = 0,   nu >= 0, beta != 0,

on ``[t0, T] x box``, each axis periodic or a wall (Dirichlet velocity data). The derivation is
in ``docs/theory/navier-stokes.md``. With ``w = u_model - u``, ``pi = beta (p_model - p)``,
``R_u`` the momentum residuals and ``R_div = div u_model`` (so ``div w = R_div``), the energy
identity and Young's inequality give, for ``Y = ||w||^2``,

    Y' <= (lambda + 2 kappa(t)) Y + ||R_u||^2 / lambda
          + ((V + V*)^2 + 2 Pi) int |R_div| + B(t),

``kappa(t) = sup_x lambda_max(-sym grad u)`` (the largest compressive strain rate of the exact
flow), ``V, V*`` sup bounds of the exact and model velocity, ``Pi = |beta| (P + P*)`` of the
pressures, and ``B`` the wall fluxes (``w = R_b`` on a wall) or the periodicity mismatch terms.
Only the velocity error is bounded; the pressure error is not. Then Gronwall.

References: the residual stability framework of Mishra & Molinaro (IMA J. Numer. Anal. 43
(2023) 1-43, their incompressible Euler example) and De Ryck, Jagtap & Mishra (IMA J. Numer.
Anal. 2024, arXiv 2203.09346, the Navier-Stokes stability estimate on the periodic box); the
energy method for Navier-Stokes (e.g. Temam, Navier-Stokes Equations, North-Holland 1977).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import sympy

from boundsvc.errors import RegularityError
from boundsvc.expr import time_symbol, to_latex, to_text
from boundsvc.families._analysis import AnalysedProblem
from boundsvc.families._base import (
    CertifyInputs,
    Classified,
    ConstantInfo,
    EnergyInequality,
    Family,
    FloatArray,
    Requirement,
    SourceInfo,
)
from boundsvc.families._linear import affine_split, field_symbols
from boundsvc.families.ode_system import PiecewiseConstantRate
from boundsvc.gronwall import Rate
from boundsvc.intervals import IntervalError, enclose
from boundsvc.quadrature import TimeGrid, face_slice_integrals, slice_integrals, total_integral
from boundsvc.regularity import RegularityValue

REFERENCE = (
    "Residual stability framework: S. Mishra, R. Molinaro, Estimates on the generalization "
    "error of physics-informed neural networks for approximating PDEs, IMA J. Numer. Anal. 43 "
    "(2023) 1-43 (incompressible Euler); T. De Ryck, A. D. Jagtap, S. Mishra, Error estimates "
    "for physics-informed neural networks approximating the Navier-Stokes equations, IMA J. "
    "Numer. Anal. (2024), arXiv 2203.09346; energy method: R. Temam, Navier-Stokes Equations, "
    "North-Holland 1977, ch. III; Gronwall: T. H. Gronwall, Ann. Math. 20 (1919) 292-296."
)

#: keys of vector and matrix quantities (the per-component keys follow the contract pattern)
STRAIN_KEY = "sup_neg_strain"
SPEED_KEY = "sup_abs_velocity"
MODEL_SPEED_KEY = "sup_abs_model_velocity"
#: time slabs of the piecewise-constant rate (time-varying regularity values)
SLABS = 64
#: relative slack on the computed strain bound (a few roundings of sums and a square root)
_EIG_SLACK = 1e-12


def _slab_sups(value: RegularityValue, edges: FloatArray) -> FloatArray:
    """A certified upper bound of a regularity value on each slab ``[edges[k], edges[k+1]]``
    (the natural interval extension, outward rounded; infinite where it cannot be bounded)."""
    if value.expression is None:
        return np.full(edges.size - 1, float(value.constant or 0.0))
    out = np.empty(edges.size - 1)
    ts = time_symbol()
    for k in range(edges.size - 1):
        try:
            out[k] = enclose(value.expression, {ts: (float(edges[k]), float(edges[k + 1]))})[1]
        except IntervalError:
            out[k] = math.inf
    return out


@dataclass(frozen=True)
class _Roles:
    """Which unknown and which equation plays which part."""

    velocity: dict[str, str]  # axis -> velocity component (unknown name)
    pressure: str
    momentum: dict[str, int]  # axis -> equation index
    divergence: int
    alpha: dict[str, sympy.Expr]  # axis -> coefficient of the time derivative (symbolic)
    beta: sympy.Expr  # pressure-gradient coefficient after normalisation (symbolic)
    nu: sympy.Expr  # viscosity (symbolic)
    delta: sympy.Expr  # coefficient of div u in the constraint (symbolic)
    force: dict[str, sympy.Expr]  # axis -> body force (symbolic)


def _field_symbols(expr: sympy.Expr, problem: AnalysedProblem) -> set[sympy.Symbol]:
    return field_symbols(expr, problem.namespace)


def _is_constant(expr: sympy.Expr, problem: AnalysedProblem) -> bool:
    """Free of fields and coordinates (parameters are allowed)."""
    return not (expr.free_symbols - set(problem.parameter_values))


def _numeric(expr: sympy.Expr, problem: AnalysedProblem) -> float:
    return float(problem.substitute(expr))


def recognise_roles(problem: AnalysedProblem) -> _Roles | str:
    """Identify pressure, velocity components, momentum and constraint equations, or why not."""
    ns = problem.namespace
    axes = problem.domain.space_axes
    d = len(axes)
    names = problem.unknowns
    infos = {
        i: [ns.describe(s) for s in _field_symbols(e, problem)]
        for i, e in enumerate(problem.residuals)
    }
    # the pressure: appears only through first space derivatives, never in time
    pressure_candidates = []
    for name in names:
        uses = [info for lst in infos.values() for info in lst if info and info.unknown == name]
        if uses and all(info.order == 1 and info.derivative[0] != "t" for info in uses):
            pressure_candidates.append(name)
    if len(pressure_candidates) != 1:
        return (
            "no unknown appears only through its first space derivatives (the pressure: no "
            "time derivative, no value, no second derivative)"
            if not pressure_candidates
            else "several unknowns appear only through first space derivatives "
            f"({', '.join(pressure_candidates)}); exactly one must be the pressure"
        )
    pressure = pressure_candidates[0]
    vel_names = [n for n in names if n != pressure]
    momentum_eqs = []
    constraint_eqs = []
    for i, lst in infos.items():
        timed_set = {info.unknown for info in lst if info and "t" in info.derivative}
        if timed_set:
            if len(timed_set) > 1:
                return f"equation {i + 1} has time derivatives of several unknowns"
            momentum_eqs.append(i)
        else:
            constraint_eqs.append(i)
    if len(constraint_eqs) != 1:
        return (
            "no equation is the incompressibility constraint div u = 0 (an equation without "
            "time derivatives); a compressible flow (a density equation) is not covered"
            if not constraint_eqs
            else f"{len(constraint_eqs)} equations have no time derivative; exactly one "
            "(div u = 0) is expected"
        )
    velocity: dict[str, str] = {}
    momentum: dict[str, int] = {}
    for i in momentum_eqs:
        p_axes = [info.derivative[0] for info in infos[i] if info and info.unknown == pressure]
        timed = str(next(info.unknown for info in infos[i] if info and "t" in info.derivative))
        if len(set(p_axes)) != 1:
            return (
                f"equation {i + 1} (the momentum equation of {timed}) must contain the "
                f"pressure gradient along exactly one axis, {pressure}_<axis>"
            )
        axis = p_axes[0]
        if axis in velocity:
            return (
                f"two momentum equations contain {pressure}_{axis}; each axis needs its own "
                "momentum equation"
            )
        if timed in velocity.values():
            return f"two equations have the time derivative {timed}_t"
        velocity[axis] = timed
        momentum[axis] = i
    if set(velocity) != set(axes) or set(velocity.values()) != set(vel_names):
        return (
            "the momentum equations do not pair one velocity component with each axis "
            f"({', '.join(axes)}) through the pressure gradient"
        )
    alpha: dict[str, sympy.Expr] = {}
    force: dict[str, sympy.Expr] = {}
    betas: list[sympy.Expr] = []
    nus: list[sympy.Expr] = []
    for a in axes:
        i = momentum[a]
        c = velocity[a]
        expr = problem.residuals[i]
        split_t = affine_split(expr, [ns.field(c, ("t",))])
        if isinstance(split_t, str):
            return f"equation {i + 1} is not linear in {c}_t"
        al = split_t.coefficients.get(ns.field(c, ("t",)), sympy.Integer(0))
        if not _is_constant(al, problem) or _numeric(al, problem) == 0:
            return f"the coefficient of {c}_t in equation {i + 1} must be a nonzero constant"
        normal = sympy.expand(expr / al)
        convective = sympy.Add(*[ns.field(velocity[b], ()) * ns.field(c, (b,)) for b in axes])
        rest = sympy.expand(normal - ns.field(c, ("t",)) - convective)
        gens = [ns.field(pressure, (a,)), *[ns.field(c, (b, b)) for b in axes]]
        split = affine_split(rest, gens)
        misfit = isinstance(split, str) or bool(
            _field_symbols(split.remainder, problem)
            | set().union(*[_field_symbols(v, problem) for v in split.coefficients.values()])
        )
        if isinstance(split, str) or misfit:
            shown = sorted(
                to_text(term, ns)
                for term in sympy.Add.make_args(rest)
                if _field_symbols(term, problem) - set(gens)
                or len(_field_symbols(term, problem)) > 1
            )
            return (
                f"equation {i + 1} is not a momentum equation {c}_t + (u.grad){c} + "
                f"{pressure}_{a} = nu*Lap({c}) + f in convective form (after dividing by the "
                f"coefficient of {c}_t, the terms {', '.join(shown[:4]) or to_text(rest, ns)} "
                "do not fit; the convective term must be "
                + " + ".join(f"{velocity[b]}*{c}_{b}" for b in axes)
                + ")"
            )
        for g, coeff in split.coefficients.items():
            if not _is_constant(coeff, problem):
                return (
                    f"the coefficient of {ns.display_name(g)} in equation {i + 1} is not a "
                    "constant (variable viscosity or density is not covered)"
                )
        beta = split.coefficients.get(gens[0], sympy.Integer(0))
        if _numeric(beta, problem) == 0:
            return f"the pressure gradient {pressure}_{a} cancels in equation {i + 1}"
        betas.append(beta)
        visc = [-split.coefficients.get(g, sympy.Integer(0)) for g in gens[1:]]
        if len({problem.substitute(v) for v in visc}) != 1:
            return (
                f"equation {i + 1}: the viscous term must be nu*Lap({c}) with the same nu "
                "along every axis (anisotropic viscosity is not covered)"
            )
        nus.append(visc[0])
        alpha[a] = al
        force[a] = sympy.expand(-split.remainder)
    if len({problem.substitute(b) for b in betas}) != 1:
        return "the pressure-gradient coefficient differs between the momentum equations"
    if len({problem.substitute(v) for v in nus}) != 1:
        return "the viscosity differs between the momentum equations"
    nu_value = _numeric(nus[0], problem)
    if nu_value < 0:
        return f"the viscosity is {nu_value:g} < 0 (backward diffusion): ill-posed"
    k = constraint_eqs[0]
    expr = problem.residuals[k]
    divergence_terms = [ns.field(velocity[a], (a,)) for a in axes]
    split = affine_split(expr, divergence_terms)
    if isinstance(split, str) or split.remainder != 0:
        return (
            f"equation {k + 1} is not the incompressibility constraint "
            + " + ".join(f"{velocity[a]}_{a}" for a in axes)
            + " = 0 (a nonzero right-hand side or other terms: compressible flow, or a "
            "source of mass, is not covered)"
        )
    deltas = [split.coefficients.get(g, sympy.Integer(0)) for g in divergence_terms]
    if (
        not all(_is_constant(c, problem) for c in deltas)
        or len({problem.substitute(c) for c in deltas}) != 1
        or _numeric(deltas[0], problem) == 0
    ):
        return f"equation {k + 1} is not a constant multiple of div u = " + " + ".join(
            f"{velocity[a]}_{a}" for a in axes
        )
    for a in axes:
        if (
            force[a].free_symbols
            - set(problem.parameter_values)
            - {ns.coordinate(c) for c in ("t", *axes)}
        ):
            return f"the body force of the {a}-momentum equation depends on the unknowns"
    del d
    return _Roles(
        velocity=velocity,
        pressure=pressure,
        momentum=momentum,
        divergence=k,
        alpha=alpha,
        beta=betas[0],
        nu=nus[0],
        delta=deltas[0],
        force=force,
    )


class NavierStokesFamily(Family):
    """Incompressible Navier-Stokes (nu > 0) and Euler (nu = 0) on a box, 2-D and 3-D."""

    id = "incompressible-navier-stokes"
    title = "Incompressible Navier-Stokes / Euler equations (velocity energy estimate)"
    equation_form = (
        "u_t + (u.grad)u + beta*grad(p) = nu*Lap(u) + f(x,t),  div u = 0  (nu >= 0; d = 2, 3)"
    )
    hypotheses = (
        "The exact velocity u is C^1 in t and C^2 in x (C^1 for nu = 0) on the closed domain, "
        "the exact pressure p is C^1 in x, and div u = 0 exactly.",
        "Walls (Dirichlet axes): the velocity boundary data equal the exact velocity's trace, "
        "so w = u_model - u equals the boundary residual there.",
        "Periodic axes: the exact velocity and pressure are periodic along them (a mean "
        "pressure gradient belongs in the body force f).",
        "Regularity values bound, at each time, sup over space of: |d u_i/d x_j| (or the "
        "compressive strain rate sup_neg_strain = sup lambda_max(-sym grad u)), |u_i| of the "
        "exact and of the model velocity (or the Euclidean norms sup_abs_velocity, "
        "sup_abs_model_velocity), |p| and |p_model| for some additive normalisation of each "
        "pressure (any constant may be chosen, e.g. the one minimising the sup), and on walls "
        "|d u_i/d n| of both velocities.",
        "Only the velocity error is bounded (L2 over the box); the pressure error is not.",
        "Residual integrals are taken by the plan's quadrature (see each term's rigor).",
    )
    bounded_quantities = ("l2_space_time", "l2_final_time", "time_profile")
    reference = REFERENCE
    theory_document = "docs/theory/navier-stokes.md"
    typical_regularity = (
        "sup_abs_u_x",
        "sup_abs_u",
        "sup_abs_model_u",
        "sup_abs_p",
        "sup_abs_model_p",
    )
    typical_optional = (STRAIN_KEY, SPEED_KEY, MODEL_SPEED_KEY)
    typical_components = ("interior", "initial", "boundary", "periodic")

    def recognise(self, problem: AnalysedProblem) -> Classified | str:
        if problem.is_steady:
            return "the problem is steady (no time interval); this family is time-dependent"
        d = problem.domain.dimension
        if d not in (2, 3):
            return f"the problem has {d} space axes; this family needs 2 or 3"
        if len(problem.unknowns) != d + 1:
            return (
                f"this family has {d + 1} unknowns in {d} dimensions (the velocity "
                "components and the pressure)"
            )
        roles = recognise_roles(problem)
        if isinstance(roles, str):
            return roles
        reserved = {SPEED_KEY, MODEL_SPEED_KEY, STRAIN_KEY}
        clash = [n for n in problem.unknowns if f"sup_abs_{n}" in reserved]
        if clash or "model" in problem.unknowns:
            return "the unknown names 'velocity' and 'model' are reserved by the regularity keys"
        return ClassifiedNavierStokes(family=self, problem=problem, roles=roles)


class ClassifiedNavierStokes(Classified):
    """A recognised incompressible Navier-Stokes / Euler problem."""

    def __init__(self, *, family: Family, problem: AnalysedProblem, roles: _Roles) -> None:
        self.family = family
        self.problem = problem
        self.roles = roles
        self.axes = problem.domain.space_axes
        self.d = len(self.axes)
        self.nu = _numeric(roles.nu, problem)
        self.beta = abs(_numeric(roles.beta, problem))
        self.alpha = {a: _numeric(roles.alpha[a], problem) for a in self.axes}
        self.delta = _numeric(roles.delta, problem)
        names = problem.unknowns
        # column of each velocity axis in the initial/boundary/periodic rows (unknown order)
        self.column = {a: names.index(roles.velocity[a]) for a in self.axes}
        self.p_column = names.index(roles.pressure)
        self.viscous = self.nu > 0

    # -- what the theorem needs ----------------------------------------------------------
    def components(self) -> list[str]:
        names = ["interior", "initial"]
        dom = self.problem.domain
        if dom.dirichlet_axes:
            names.append("boundary")
        if dom.periodic_axes:
            names.append("periodic")
            if self.viscous:
                names += [f"periodic_{a}" for a in dom.periodic_axes]
        return names

    def _c(self, a: str) -> str:
        return self.roles.velocity[a]

    def requirements(self) -> list[Requirement]:
        reqs: list[Requirement] = []
        walls = self.problem.domain.dirichlet_axes if self.viscous else ()
        for a in self.axes:
            for b in self.axes:
                key = f"sup_abs_{self._c(a)}_{b}"
                any_of = (key,) if b in walls else (key, STRAIN_KEY)
                reqs.append(
                    Requirement(
                        any_of,
                        "growth rate 2 kappa (compressive strain rate of the exact flow)"
                        + (f"; viscous wall flux on the faces normal to {b}" if b in walls else ""),
                        f"sup |d {self._c(a)}/d {b}| of the exact solution, per time",
                    )
                )
        for a in self.axes:
            c = self._c(a)
            reqs.append(
                Requirement(
                    (f"sup_abs_{c}", SPEED_KEY),
                    "divergence-residual and boundary terms (|w| <= |u| + |u_model|)",
                    f"sup |{c}| of the exact solution, per time",
                )
            )
            reqs.append(
                Requirement(
                    (f"sup_abs_model_{c}", MODEL_SPEED_KEY),
                    "divergence-residual and boundary terms (|w| <= |u| + |u_model|)",
                    f"sup |{c}| of the model, per time",
                )
            )
        p = self.roles.pressure
        reqs.append(
            Requirement(
                (f"sup_abs_{p}",),
                "pressure terms of the divergence and boundary residuals",
                f"sup |{p}| of the exact pressure (any additive normalisation), per time",
            )
        )
        reqs.append(
            Requirement(
                (f"sup_abs_model_{p}",),
                "pressure terms of the divergence and boundary residuals",
                f"sup |{p}| of the model pressure (any additive normalisation), per time",
            )
        )
        for b in walls:
            for a in self.axes:
                reqs.append(
                    Requirement(
                        (f"sup_abs_model_{self._c(a)}_{b}",),
                        f"viscous wall flux on the faces normal to {b}",
                        f"sup over the walls of |d {self._c(a)}/d {b}| of the model",
                    )
                )
        return reqs

    def optional_keys(self) -> list[str]:
        keys = [STRAIN_KEY, SPEED_KEY, MODEL_SPEED_KEY]
        if self.viscous:
            for b in self.problem.domain.periodic_axes:
                keys += [f"sup_abs_model_{self._c(a)}_{b}" for a in self.axes]
        return keys

    def description(self) -> dict[str, object]:
        ns = self.problem.namespace
        r = self.roles
        return {
            "form": self.family.equation_form,
            "velocity": dict(r.velocity),
            "pressure": r.pressure,
            "momentum_equations": {a: i + 1 for a, i in r.momentum.items()},
            "divergence_equation": r.divergence + 1,
            "viscosity": to_text(r.nu, ns),
            "euler": not self.viscous,
            "pressure_coefficient": to_text(r.beta, ns),
            "body_force": {a: to_text(f, ns) for a, f in r.force.items()},
            "boundary": dict(self.problem.domain.boundary),
            "bounded": "velocity error in L2 (the pressure error is not bounded)",
            "residual_columns": {
                "interior": "one column per equation, in equation order",
                "initial": "one column per unknown (velocity: u_model - u0; pressure: unused)",
                "boundary": "one column per unknown (velocity: u_model - g; pressure: unused)",
                "periodic": "one column per unknown: value(high face) - value(low face)",
                "periodic_<axis>": "one column per unknown: d/d axis (high) - d/d axis (low); "
                "pressure: unused",
            },
        }

    def constants(self) -> list[ConstantInfo]:
        ns = self.problem.namespace
        r = self.roles
        nu_text, nu_latex = to_text(r.nu, ns), to_latex(r.nu, ns)
        beta_text = to_text(r.beta, ns)
        out = [
            ConstantInfo(
                name="growth rate of ||w||^2",
                symbol="a(t)",
                expression="lambda + 2*kappa(t)",
                latex=r"\lambda + 2\kappa(t)",
                derivation=(
                    "Error equation: w_t + (u_model.grad)w + (w.grad)u + grad(pi) - nu Lap w = "
                    "R_u, with w = u_model - u, pi = beta (p_model - p), div w = R_div.",
                    "Multiply by w and integrate: (w.grad)u . w = w . sym(grad u) w >= "
                    "-kappa |w|^2, kappa(t) = sup_x lambda_max(-sym grad u).",
                    "kappa from sup_neg_strain, or from the entry bounds g_ij >= |d u_i/d x_j|: "
                    "kappa <= min(max_i sum_j B_ij, sqrt((d-1)/d) ||B||_F), B_ij = (g_ij + "
                    "g_ji)/2 (2-D: B_11 = B_22 = min(g_11, g_22), since u_x = -v_y).",
                    "2 (R_u, w) <= lambda ||w||^2 + ||R_u||^2 / lambda (Young, any lambda > 0).",
                    "The dissipation -2 nu ||grad w||^2 <= 0 is dropped.",
                    "lambda is chosen per output to minimise the bound (every lambda > 0 is "
                    "valid).",
                ),
                reference=REFERENCE,
                rigor="assumed",
            ),
            ConstantInfo(
                name="divergence-residual factor",
                symbol="D(t)",
                expression=f"(V(t) + V_model(t))^2 + 2*|{beta_text}|*(P(t) + P_model(t))",
                latex=r"(V + V^*)^2 + 2|\beta|(P + P^*)",
                derivation=(
                    "(u_model.grad)w . w = div(u_model |w|^2/2) - R_div |w|^2/2: after "
                    "integration a flux and + int R_div |w|^2 (times 2).",
                    "grad(pi) . w = div(pi w) - pi R_div: a flux and + 2 int pi R_div.",
                    "|w| <= V + V_model (sup of the Euclidean velocity norms), |pi| <= |beta| "
                    "(P + P_model): the forcing D(t) int |R_div(t)| dx.",
                ),
                reference=REFERENCE,
                rigor="assumed",
            ),
        ]
        if self.problem.domain.dirichlet_axes:
            out.append(
                ConstantInfo(
                    name="wall flux",
                    symbol="B_wall(t)",
                    expression=(
                        f"int_walls [V_model_n |R_b|^2 + 2 |{beta_text}| (P + P_model) |R_b.n| "
                        f"+ 2 ({nu_text}) |R_b| (G_n + G_model_n)]"
                    ),
                    latex=(
                        r"\int_{\partial\Omega} V^*_n |R_b|^2 + 2|\beta|(P+P^*)|R_b\cdot n| "
                        rf"+ 2 ({nu_latex}) |R_b| (G_n + G^*_n)"
                    ),
                    derivation=(
                        "On a wall w = R_b (the boundary residual, velocity components).",
                        "-(u_model.n) |w|^2 <= |u_model.n| |R_b|^2 <= V_model_n |R_b|^2.",
                        "-2 pi (w.n) <= 2 |beta| (P + P_model) |R_b.n|.",
                        "2 nu (d_n w) . w <= 2 nu |R_b| (G_n + G_model_n), G_n = (sum_i "
                        "sup |d u_i/d n|^2)^(1/2) (and the model's).",
                    ),
                    reference=REFERENCE,
                    rigor="assumed",
                )
            )
        if self.problem.domain.periodic_axes:
            out.append(
                ConstantInfo(
                    name="periodicity mismatch",
                    symbol="B_per(t)",
                    expression=(
                        "int_F [|P0_i| W^2 + 2 V_model_i W |P0| + 2 (|beta| |Pp| W + Pi |P0_i|)"
                        f" + 2 ({nu_text}) (|P1| W + G_i |P0|)]"
                    ),
                    latex=(
                        r"\int_F |P_{0,i}| W^2 + 2 V^*_i W |P_0| + 2(|\beta||P_p| W + \Pi "
                        rf"|P_{{0,i}}|) + 2 ({nu_latex})(|P_1| W + G_i |P_0|)"
                    ),
                    derivation=(
                        "u, p periodic: w(hi) - w(lo) = P0, d_i w(hi) - d_i w(lo) = P1, "
                        "pi(hi) - pi(lo) = beta Pp (model mismatches).",
                        "a b|hi - a b|lo = (a_hi - a_lo) b_hi + a_lo (b_hi - b_lo) on each face "
                        "pair, for each of the three fluxes.",
                        "W = V + V_model >= |w|, Pi = |beta| (P + P_model) >= |pi|, "
                        "G_i >= |d_i w|.",
                    ),
                    reference=REFERENCE,
                    rigor="assumed",
                )
            )
        return out

    # -- regularity helpers ---------------------------------------------------------------
    def _speed(
        self, reg: Mapping[str, RegularityValue], times: FloatArray, model: bool
    ) -> tuple[FloatArray, dict[str, FloatArray]]:
        """Bound of the Euclidean velocity norm and of each component, at the times."""
        who = "model_" if model else ""
        vector = reg.get(MODEL_SPEED_KEY if model else SPEED_KEY)
        comps: dict[str, FloatArray] = {}
        for a in self.axes:
            key = f"sup_abs_{who}{self._c(a)}"
            values = [reg[key].at(times)] if key in reg else []
            if vector is not None:
                values.append(vector.at(times))
            assert values, key  # the requirements guarantee one of them
            comps[a] = np.min(np.stack(values), axis=0)
        norm = np.sqrt(sum(np.square(v) for v in comps.values()))
        if vector is not None:
            norm = np.minimum(norm, vector.at(times))
        return norm, comps

    def _pressure(self, reg: Mapping[str, RegularityValue], times: FloatArray) -> FloatArray:
        p = self.roles.pressure
        return self.beta * (reg[f"sup_abs_{p}"].at(times) + reg[f"sup_abs_model_{p}"].at(times))

    def _normal_gradient(
        self, reg: Mapping[str, RegularityValue], times: FloatArray, axis: str, what: str
    ) -> FloatArray:
        """``sup |d u/d axis|`` (Euclidean over components) of the exact solution plus the
        model's; raise ``regularity_missing`` naming the first absent key."""
        total = np.zeros(times.size)
        for who in ("", "model_"):
            sq = np.zeros(times.size)
            for a in self.axes:
                key = f"sup_abs_{who}{self._c(a)}_{axis}"
                if key not in reg:
                    raise RegularityError(
                        "regularity_missing",
                        f"the {what} residuals are not zero, so the viscous flux needs {key}",
                        f"regularity.{key}",
                    )
                sq += np.square(reg[key].at(times))
            total += np.sqrt(sq)
        return total

    def _kappa(self, values: Mapping[str, FloatArray]) -> FloatArray:
        """Bound of ``kappa`` from bounds of the strain key and/or the gradient entries (all
        arrays of the same shape); monotone nondecreasing in every input."""
        d = self.d
        entries = [[f"sup_abs_{self._c(a)}_{b}" for b in self.axes] for a in self.axes]
        shape = next(iter(values.values())).shape
        best = np.full(shape, np.inf)
        if STRAIN_KEY in values:
            best = np.minimum(best, values[STRAIN_KEY])
        if all(k in values for row in entries for k in row):
            # g[..., i, j] >= |d u_i / d x_j|
            g = np.stack([np.stack([values[k] for k in row], axis=-1) for row in entries], -2)
            b = 0.5 * (g + np.swapaxes(g, -1, -2))
            if d == 2:
                # u_x = -v_y: both diagonal entries of sym grad u are bounded by the min
                diag = np.minimum(g[..., 0, 0], g[..., 1, 1])
                b[..., 0, 0] = diag
                b[..., 1, 1] = diag
            # trace-free S: lambda_max(-S)^2 <= (d-1)/d ||S||_F^2 <= (d-1)/d ||B||_F^2
            frob = np.sqrt((d - 1) / d * np.sum(np.square(b), axis=(-1, -2)))
            # ||S||_2 <= rho(B) <= max row sum of B (Perron-Frobenius, Gershgorin)
            rows = np.max(np.sum(b, axis=-1), axis=-1)
            best = np.minimum(best, np.minimum(frob, rows) * (1 + _EIG_SLACK))
        return best

    def _rate(self, reg: Mapping[str, RegularityValue], grid: TimeGrid) -> tuple[Rate, str]:
        """``2 kappa(t)``: constant, or piecewise constant on ``SLABS`` time slabs with the
        certified sup of every regularity value over each slab (``kappa`` is monotone in
        them); with a pole inside the interval, the pointwise function (slower)."""
        entries = [f"sup_abs_{self._c(a)}_{b}" for a in self.axes for b in self.axes]
        have_entries = all(k in reg for k in entries)
        keys = ([STRAIN_KEY] if STRAIN_KEY in reg else []) + (entries if have_entries else [])
        method = " and ".join(
            (["sup_neg_strain"] if STRAIN_KEY in reg else [])
            + (["gradient entries (trace-free Frobenius / row-sum bound)"] if have_entries else [])
        )
        groups = [[STRAIN_KEY]] if STRAIN_KEY in reg else []
        if have_entries:
            groups.append(entries)
        # the minimum of the two bounds diverges only where both do
        pole_sets = [set().union(*[set(reg[k].poles) for k in g]) for g in groups]
        poles = tuple(sorted(set.intersection(*pole_sets))) if pole_sets else ()
        if all(reg[k].is_constant for k in keys):
            values = {k: np.array([float(reg[k].constant or 0.0)]) for k in keys}
            return Rate(constant=float(2 * self._kappa(values)[0])), method
        if poles:
            return (
                Rate(
                    function=lambda t: 2 * self._kappa({k: reg[k].at(t) for k in keys}),
                    poles=poles,
                ),
                method,
            )
        edges = np.linspace(grid.t0, grid.t_end, SLABS + 1)
        slab = {k: _slab_sups(reg[k], edges) for k in keys}
        slab_rate = 2 * self._kappa(slab)
        return (
            PiecewiseConstantRate.build(edges.tolist(), slab_rate.tolist(), None),
            method + f", {SLABS} time slabs",
        )

    # -- the inequality --------------------------------------------------------------------
    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        grid = plan.time
        assert grid is not None
        n_t, times = grid.size, grid.nodes
        d = self.d
        r = self.roles
        interior = plan.components["interior"]
        r_int = res["interior"]
        mom = np.stack([r_int[:, r.momentum[a]] / self.alpha[a] for a in self.axes], axis=1)
        r_div = r_int[:, r.divergence] / self.delta
        residual = slice_integrals(interior, np.einsum("ij,ij->i", mom, mom), n_t)
        div_l1 = slice_integrals(interior, np.abs(r_div), n_t)
        r0 = res["initial"][:, [self.column[a] for a in self.axes]]
        y0 = total_integral(plan.components["initial"], np.einsum("ij,ij->i", r0, r0))

        speed, _ = self._speed(reg, times, model=False)
        speed_m, comp_m = self._speed(reg, times, model=True)
        big_w = speed + speed_m
        big_pi = self._pressure(reg, times)
        forcing: dict[str, FloatArray] = {}
        info: dict[str, SourceInfo] = {}
        warnings: list[str] = []
        if np.any(div_l1 > 0):
            forcing["divergence"] = (np.square(big_w) + 2 * big_pi) * div_l1
            info["divergence"] = SourceInfo(
                "divergence residual",
                "D(t) int |R_div|",
                "((V + V_model)^2 + 2 |beta| (P + P_model)) int |div u_model| dx",
                "heuristic",
                "rests on the asserted sup bounds (assumed) and the quadrature; enters the "
                "squared bound to the first power",
            )
        else:
            warnings.append(
                "the divergence residual is zero at every sample; the model is taken to be "
                "exactly divergence-free"
            )
        if "boundary" in plan.components:
            forcing.update(self._wall_terms(inputs, speed_m, comp_m, big_pi, info))
        for axis in self.problem.domain.periodic_axes:
            forcing.update(
                self._periodic_terms(inputs, axis, big_w, comp_m, big_pi, info, warnings)
            )
        rate, method = self._rate(reg, grid)
        constants = [c.with_value(None) for c in self.constants()]
        if isinstance(rate, PiecewiseConstantRate):
            kappa_nodes = np.asarray(rate.values) / 2  # every slab: the max over [t0, T]
        else:
            kappa_nodes = np.asarray(rate(times), dtype=np.float64) / 2
        constants[0] = constants[0].with_value(float(np.max(2 * kappa_nodes)), "assumed")
        constants.append(
            ConstantInfo(
                name="compressive strain rate bound",
                symbol="kappa(t)",
                expression=f"max over [t0, T] {float(np.max(kappa_nodes)):.17g}",
                latex=r"\kappa(t) \ge \sup_x \lambda_{\max}(-\mathrm{sym}\,\nabla u)",
                derivation=(f"from {method}",),
                reference=REFERENCE,
                value=float(np.max(kappa_nodes)),
                rigor="assumed",
            )
        )
        warnings.append(
            "the bound is for the velocity error in L2; the pressure error is not bounded"
        )
        return EnergyInequality(
            base_rate=rate,
            initial=y0,
            initial_info=SourceInfo(
                "initial residual",
                "||R_0||^2",
                "int |u_model(x,t0) - u0|^2 dx (velocity components)",
                "heuristic",
                "quadrature of the initial residual",
            ),
            residual=residual,
            residual_info=SourceInfo(
                "momentum residual",
                "||R_u||^2/lambda",
                "int_t0^t e^{A(s,t)} ||R_u(s)||^2 / lambda ds",
                "heuristic",
                "quadrature of the momentum residuals",
            ),
            forcing=forcing,
            forcing_info=info,
            nonnegative=tuple(forcing),
            constants=constants,
            warnings=warnings,
            failed_hypotheses=[],
            rate_rigor="assumed",
            inputs={
                "kappa_max": float(np.max(kappa_nodes)),
                "nu": self.nu,
                "d": float(d),
            },
        )

    def _wall_terms(
        self,
        inputs: CertifyInputs,
        speed_m: FloatArray,
        comp_m: Mapping[str, FloatArray],
        big_pi: FloatArray,
        info: dict[str, SourceInfo],
    ) -> dict[str, FloatArray]:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        assert plan.time is not None
        n_t, times = plan.time.size, plan.time.nodes
        bnd = plan.components["boundary"]
        assert bnd.face_index is not None
        rb = res["boundary"][:, [self.column[a] for a in self.axes]]
        norm = np.sqrt(np.einsum("ij,ij->i", rb, rb))
        total = np.zeros(n_t)
        for f, face in enumerate(bnd.faces):
            mask = bnd.face_index == f
            if not np.any(norm[mask]):
                continue
            k = self.axes.index(face.axis)
            sq = face_slice_integrals(bnd, np.where(mask, np.square(norm), 0.0), n_t)[f]
            normal = face_slice_integrals(bnd, np.where(mask, np.abs(rb[:, k]), 0.0), n_t)[f]
            total += comp_m[face.axis] * sq + 2 * big_pi * normal
            if self.viscous:
                ab = face_slice_integrals(bnd, np.where(mask, norm, 0.0), n_t)[f]
                g = self._normal_gradient(reg, times, face.axis, "wall")
                total += 2 * self.nu * ab * g
        del speed_m
        if not np.any(total):
            return {}
        info["wall"] = SourceInfo(
            "wall flux",
            "B_wall(t)",
            "int_walls V_model_n |R_b|^2 + 2 Pi |R_b.n| + 2 nu |R_b| (G_n + G_model_n)",
            "heuristic",
            "rests on the asserted sup bounds (assumed) and the quadrature of the faces; "
            "enters the squared bound to the first power",
        )
        return {"wall": total}

    def _periodic_terms(
        self,
        inputs: CertifyInputs,
        axis: str,
        big_w: FloatArray,
        comp_m: Mapping[str, FloatArray],
        big_pi: FloatArray,
        info: dict[str, SourceInfo],
        warnings: list[str],
    ) -> dict[str, FloatArray]:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        assert plan.time is not None
        n_t, times = plan.time.size, plan.time.nodes
        comp = plan.components["periodic"]
        assert comp.face_index is not None
        f = [fc.axis for fc in comp.faces].index(axis)
        mask = comp.face_index == f
        cols = [self.column[a] for a in self.axes]
        p0 = np.where(mask[:, None], res["periodic"][:, cols], 0.0)
        pp = np.where(mask, res["periodic"][:, self.p_column], 0.0)
        p1_name = f"periodic_{axis}"
        p1 = (
            np.where(mask[:, None], res[p1_name][:, cols], 0.0)
            if self.viscous and p1_name in res
            else np.zeros_like(p0)
        )
        if not (np.any(p0) or np.any(pp) or np.any(p1)):
            warnings.append(
                f"the periodicity residuals along {axis} are zero at every sample; the model "
                "is taken to be exactly periodic along it"
            )
            return {}
        k = self.axes.index(axis)
        n0 = np.sqrt(np.einsum("ij,ij->i", p0, p0))
        n1 = np.sqrt(np.einsum("ij,ij->i", p1, p1))

        def integral(values: FloatArray) -> FloatArray:
            return face_slice_integrals(comp, values, n_t)[f]

        i0, i0k, ipp = integral(n0), integral(np.abs(p0[:, k])), integral(np.abs(pp))
        # -(u_model_i |w|^2)|_lo^hi: P0_i |w_hi|^2 + u_model_i,lo P0.(w_hi + w_lo)
        term = i0k * np.square(big_w) + 2 * comp_m[axis] * big_w * i0
        # -2 (pi w_i)|_lo^hi: beta Pp w_i,hi + pi_lo P0_i
        term = term + 2 * (self.beta * ipp * big_w + big_pi * i0k)
        if self.viscous:
            # 2 nu (d_i w . w)|_lo^hi: P1 . w_hi + d_i w_lo . P0
            term = term + 2 * self.nu * integral(n1) * big_w
            if np.any(n0):
                term = term + 2 * self.nu * i0 * self._normal_gradient(
                    reg, times, axis, f"periodicity (along {axis})"
                )
        name = f"periodic_{axis}_mismatch"
        info[name] = SourceInfo(
            f"periodicity mismatch along {axis}",
            f"B_per,{axis}(t)",
            "int_F |P0_i| W^2 + 2 V_model_i W |P0| + 2 (|beta| |Pp| W + Pi |P0_i|) "
            "+ 2 nu (|P1| W + G_i |P0|)",
            "heuristic",
            "rests on the asserted sup bounds (assumed) and the quadrature of the faces",
        )
        return {name: term}
