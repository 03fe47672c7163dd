"""Linear wave equations with constant coefficients (damped, Klein-Gordon, forced).

    u_tt + b u_t + sum_i a_i u_{x_i} - sum_i k_i u_{x_i x_i} + m u = f(x, t),   k_i > 0

on ``[t0, T] x box`` (1 to 3 axes), Dirichlet or periodic per axis (``k_i = c^2`` for the
isotropic wave equation). The derivation is in ``docs/theory/wave.md``. With
``w = u_model - u`` the error solves the same equation with the normalised interior residual
``R`` as source. For the weighted energy

    E(t) = ||w_t||^2 + sum_i k_i ||w_{x_i}||^2 + mu ||w||^2,      mu > 0,

integration by parts in space and Young's inequality give

    E' <= (lambda + r) E + ||R||^2 / lambda + B(t),
    r = max(0, max_i |a_i|/sqrt(k_i), (beta + sqrt(beta^2 + 4 (mu - m)^2 / mu)) / 2),
    beta = -2 b + sum_i |a_i| / sqrt(k_i),

``B`` the boundary fluxes ``2 k_i int n_i w_t w_{x_i}`` (Dirichlet faces: ``w_t = d_t R_b`` is
known, ``|w_{x_i}| <= G_u + G_model``; periodic axes: mismatch terms). Since
``||w||^2 <= E / mu``, ``Y = E / mu`` satisfies the energy inequality of the Gronwall assembly
and bounds the squared L2 error. Every ``mu > 0`` gives a valid bound; ``mu`` is chosen per
certificate from the residual norms (a tightness choice only).

References: the energy method for the wave equation (Evans, "Partial Differential Equations",
2nd ed. 2010, sec. 2.4.3 and 7.2.2); residual-based error bounds for PINNs of the wave equation
(Mishra & Molinaro, IMA J. Numer. Anal. 43 (2023) 1-43, the stability-plus-residual framework).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np
import sympy

from boundsvc.errors import ProblemInvalid, RegularityError
from boundsvc.expr import ExpressionError, Namespace, parse_expression, to_latex, to_text
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
from boundsvc.families._common import (
    _exceeds,
    best_of,
    data_contradictions,
    display_latex,
    display_text,
    evaluate_on,
    gradient_keys,
)
from boundsvc.families._linear import affine_split, field_names, foreign_field_names
from boundsvc.families.advection_diffusion import (
    LIFTING_RATE_TOLERANCE,
    at_output_times,
    face_traces,
    interpolant_rate,
    lifting_addition,
    lifting_norm,
    offending_term,
    rate_mismatch,
)
from boundsvc.gronwall import Rate
from boundsvc.quadrature import (
    Component,
    Plan,
    face_slice_integrals,
    slice_integrals,
    total_integral,
)
from boundsvc.regularity import RegularityValue

REFERENCE = (
    "Energy method for the wave equation: L. C. Evans, Partial Differential Equations, 2nd ed., "
    "AMS 2010, sec. 2.4.3 and 7.2.2; residual stability framework: S. Mishra, R. Molinaro, "
    "IMA J. Numer. Anal. 43 (2023) 1-43; Gronwall: T. H. Gronwall, Ann. Math. 20 (1919) 292-296."
)
# candidate energy weights, in units of 1/(T - t0)^2 (mu has the units of 1/time^2)
_MU_GRID = np.geomspace(1e-4, 1e4, 41)
_MU = sympy.Symbol("mu", positive=True)


def energy_rate(mu: float, damping: float, reaction: float, transport: Sequence[float]) -> float:
    """The growth rate ``r`` of the weighted energy (see the module docstring).

    ``transport`` holds ``|a_i| / sqrt(k_i)`` per axis. For ``mu == reaction`` the cross term
    ``2 (mu - m)(w, w_t)`` vanishes; otherwise Young's inequality with the weight ``theta``
    that balances the ``||w_t||^2`` and ``mu ||w||^2`` coefficients is used."""
    s = float(sum(transport))
    beta = -2.0 * damping + s
    d = abs(mu - reaction)
    cross = beta if d == 0 else 0.5 * (beta + math.sqrt(beta * beta + 4.0 * d * d / mu))
    return max(0.0, max(transport, default=0.0), cross)


class WaveFamily(Family):
    """Second-order hyperbolic equations with constant coefficients: the energy method."""

    id = "wave"
    title = "Linear wave equation (damping, Klein-Gordon reaction, forcing), energy method"
    equation_form = (
        "u_tt + b u_t + a.grad(u) - sum_i k_i u_{x_i x_i} + m u = f(x, t),  constants k_i > 0 "
        "(k_i = c^2 for the isotropic wave equation), b, a_i, m"
    )
    hypotheses = (
        "The exact solution u is classical (C^2 in t and x) on the closed domain.",
        "Dirichlet boundary: the boundary residual is u_model - u on the boundary (the boundary "
        "data equal the exact solution's trace), and boundary_t is its time derivative.",
        "Regularity values bound |d u/d x_i| and the model's on the Dirichlet faces at each time; "
        "on periodic axes u is periodic with its derivatives, and |u_t|, |d u/d x_i| (and the "
        "model's) are bounded on the faces when the periodicity residuals are not zero.",
        "The model is C^2; initial_t and initial_<axis> are the time and space derivatives of "
        "the initial residual, evaluated exactly (automatic differentiation).",
        "Residual integrals are taken by the plan's quadrature (see each term's rigor).",
    )
    bounded_quantities = ("l2_space_time", "l2_final_time", "time_profile")
    reference = REFERENCE
    theory_document = "docs/theory/wave.md"
    typical_regularity = ("sup_abs_u_x", "sup_abs_model_u_x")
    typical_optional = (
        "sup_grad_u",
        "sup_grad_model_u",
        "sup_abs_u_t",
        "sup_abs_model_u_t",
        "sup_abs_u",
        "sup_abs_model_u",
    )
    typical_components = (
        "interior",
        "initial",
        "initial_t",
        "initial_x",
        "boundary",
        "boundary_t",
    )

    def recognise(self, problem: AnalysedProblem) -> Classified | str:
        if problem.is_steady:
            return "the problem is steady (no time interval); this family is time-dependent"
        if len(problem.unknowns) != 1:
            return "this family has a single unknown"
        axes = problem.domain.space_axes
        if not axes:
            return "the problem has no space axes"
        ns = problem.namespace
        name = problem.unknowns[0]
        u = ns.field(name, ())
        utt = ns.field(name, ("t", "t"))
        ut = ns.field(name, ("t",))
        first = {a: ns.field(name, (a,)) for a in axes}
        second = {a: ns.field(name, (a, a)) for a in axes}
        gens = [utt, ut, u, *first.values(), *second.values()]
        expr = problem.numeric[0]
        if utt not in expr.free_symbols:
            return "the equation has no second time derivative u_tt (a wave equation has one)"
        others = foreign_field_names(expr, gens, ns)
        if others:
            return (
                f"the equation contains {', '.join(others)}; a wave equation here has u_tt, u_t, "
                "u, first and pure second space derivatives only"
            )
        split = affine_split(expr, gens)
        if isinstance(split, str):
            return (
                "the equation is not linear in u and its derivatives (the term "
                f"{offending_term(expr, gens, ns)}); a nonlinear principal part or nonlinear "
                "lower-order terms are not covered by the linear energy estimate"
            )
        coords = {ns.coordinate(c) for c in ("t", *axes)}
        for g, coeff in split.coefficients.items():
            if coeff.free_symbols:
                return (
                    f"the coefficient of {ns.display_name(g)} depends on "
                    + ", ".join(sorted(ns.display_name(s) for s in coeff.free_symbols))
                    + "; this family has constant coefficients"
                )
        if split.remainder.free_symbols - coords:
            return "the source term depends on something other than x and t"
        alpha = split.coefficients[utt]

        def normalised(g: sympy.Symbol, sign: int) -> sympy.Expr:
            return sympy.nsimplify(sign * split.coefficients.get(g, sympy.Integer(0)) / alpha)

        speeds = {a: normalised(second[a], -1) for a in axes}
        for a, k in speeds.items():
            if k < 0:
                return (
                    f"the coefficient of u_{a}{a} has the wrong sign for a wave equation: in "
                    f"u_tt = k u_{a}{a} + ... the equation gives k = {k} < 0, which is elliptic "
                    "in (t, x), not hyperbolic (the initial value problem is ill-posed in the "
                    "sense of Hadamard)"
                )
            if k == 0:
                return (
                    f"there is no u_{a}{a} term: a wave equation needs c^2 u_{a}{a} with "
                    f"c^2 > 0 along every axis (a degenerate equation along {a} is not covered)"
                )
        velocity = _parse_velocity(problem)
        symbolic = affine_split(problem.residuals[0], gens)
        assert not isinstance(symbolic, str)
        s_alpha = symbolic.coefficients.get(utt, sympy.Integer(1))

        def shown(g: sympy.Symbol, sign: int) -> sympy.Expr:
            return sympy.simplify(sign * symbolic.coefficients.get(g, sympy.Integer(0)) / s_alpha)

        return ClassifiedWave(
            family=self,
            problem=problem,
            alpha=float(alpha),
            speeds={a: float(k) for a, k in speeds.items()},
            damping=float(normalised(ut, 1)),
            advection={a: float(normalised(first[a], 1)) for a in axes},
            reaction=float(normalised(u, 1)),
            symbolic={
                "b": shown(ut, 1),
                "m": shown(u, 1),
                **{f"k_{a}": shown(second[a], -1) for a in axes},
                **{f"a_{a}": shown(first[a], 1) for a in axes},
            },
            forced=split.remainder != 0,
            velocity=velocity,
            fields=field_names(expr, ns),
        )


def _parse_velocity(problem: AnalysedProblem) -> sympy.Expr | None:
    """``initial_velocity`` (our own grammar; parameters substituted exactly), or None."""
    text = problem.spec.initial_velocity
    if text is None:
        return None
    spec = problem.spec
    data_ns = Namespace(
        coordinates=("t", *spec.space), unknowns=(), parameters=tuple(spec.parameters)
    )
    try:
        expr = parse_expression(text, data_ns)
    except ExpressionError as exc:
        raise ProblemInvalid(
            exc.code,
            f"problem.initial_velocity: {exc}",
            "problem.initial_velocity",
            position=exc.position,
        ) from exc
    if expr.has(data_ns.coordinate("t")):
        raise ProblemInvalid(
            "problem_invalid",
            "the initial velocity must not depend on t",
            "problem.initial_velocity",
        )
    # same parameter order as the problem's namespace, hence the same internal symbols
    return problem.substitute(expr)


class ClassifiedWave(Classified):
    """A recognised linear wave problem (coefficients normalised by the u_tt coefficient)."""

    def __init__(
        self,
        *,
        family: Family,
        problem: AnalysedProblem,
        alpha: float,
        speeds: dict[str, float],
        damping: float,
        advection: dict[str, float],
        reaction: float,
        symbolic: dict[str, sympy.Expr],
        forced: bool,
        velocity: sympy.Expr | None,
        fields: list[str],
    ) -> None:
        self.family = family
        self.problem = problem
        self.alpha = alpha
        self.k = speeds
        self.b = damping
        self.a = advection
        self.m = reaction
        self.sym = symbolic
        self.forced = forced
        self.velocity = velocity
        self.fields = fields
        self.transport = [abs(advection[a]) / math.sqrt(speeds[a]) for a in speeds]

    # -- what the theorem needs ----------------------------------------------------------
    @property
    def _dim(self) -> int:
        return self.problem.domain.dimension

    def components(self) -> list[str]:
        domain = self.problem.domain
        names = ["interior", "initial", "initial_t", *[f"initial_{a}" for a in domain.space_axes]]
        if domain.dirichlet_axes:
            names += ["boundary", "boundary_t"]
        if domain.periodic_axes:
            names += ["periodic", "periodic_t", *[f"periodic_{a}" for a in domain.periodic_axes]]
        return names

    def requirements(self) -> list[Requirement]:
        reqs = []
        for a in self.problem.domain.dirichlet_axes:
            for model in (False, True):
                who = "of the model" if model else "(exact solution)"
                reqs.append(
                    Requirement(
                        gradient_keys(a, model, self._dim),
                        f"energy flux 2 k_{a} w_t w_{a} through the faces normal to {a}",
                        f"sup over the boundary of |u_{a}| {who}",
                    )
                )
        return reqs

    def optional_keys(self) -> list[str]:
        keys: list[str] = []
        domain = self.problem.domain
        if domain.periodic_axes:
            keys += ["sup_abs_u_t", "sup_abs_model_u_t"]
            for a in domain.periodic_axes:
                for model in (False, True):
                    keys += [k for k in gradient_keys(a, model, self._dim) if k not in keys]
        if self.problem.initial_values is not None or self.problem.boundary_value is not None:
            keys += [k for k in ("sup_abs_u", "sup_abs_model_u") if k not in keys]
        if self.velocity is not None:
            keys += [k for k in ("sup_abs_u_t", "sup_abs_model_u_t") if k not in keys]
        return keys

    def description(self) -> dict[str, object]:
        ns = self.problem.namespace
        axes = self.problem.domain.space_axes
        return {
            "form": self.family.equation_form,
            "wave_speed_squared": {a: to_text(self.sym[f"k_{a}"], ns) for a in axes},
            "damping": to_text(self.sym["b"], ns),
            "advection": {a: to_text(self.sym[f"a_{a}"], ns) for a in axes},
            "reaction": to_text(self.sym["m"], ns),
            "forcing": self.forced,
            "second_time_derivative_coefficient": self.alpha,
            "boundary": dict(self.problem.domain.boundary),
            "initial_velocity": self.problem.spec.initial_velocity,
            "fields": self.fields,
        }

    # -- constants -------------------------------------------------------------------------
    def _rate_expr(self) -> sympy.Expr:
        axes = self.problem.domain.space_axes
        transport = [sympy.Abs(self.sym[f"a_{a}"]) / sympy.sqrt(self.sym[f"k_{a}"]) for a in axes]
        transport = [t for t in transport if t != 0]
        beta = -2 * self.sym["b"] + sympy.Add(*transport)
        cross = (beta + sympy.sqrt(beta**2 + 4 * (_MU - self.sym["m"]) ** 2 / _MU)) / 2
        return sympy.Max(sympy.Integer(0), cross, *transport)

    def constants(self) -> list[ConstantInfo]:
        ns = self.problem.namespace
        rate = self._rate_expr()
        axes = self.problem.domain.space_axes
        k_text = " + ".join(f"({to_text(self.sym[f'k_{a}'], ns)})*||w_{a}||^2" for a in axes)
        k_latex = " + ".join(
            rf"({to_latex(self.sym[f'k_{a}'], ns)})\,\|w_{{{a}}}\|^2" for a in axes
        )
        out = [
            ConstantInfo(
                name="energy of the error",
                symbol="E(t)",
                expression=f"||w_t||^2 + {k_text} + mu*||w||^2",
                latex=rf"\|w_t\|^2 + {k_latex} + \mu \|w\|^2",
                derivation=(
                    "w = u_model - u solves w_tt + b w_t + a.grad(w) - sum_i k_i w_ii + m w = R, "
                    "R = (lhs - rhs on the model) / (coefficient of u_tt).",
                    "Every part of E is >= 0 (k_i > 0, mu > 0), so ||w||^2 <= E/mu: the "
                    "certificate propagates Y = E/mu, which bounds the squared L2 error.",
                    "mu > 0 is free; it is chosen per certificate from the residual norms "
                    "(smallest of a proxy of the final bound over a grid of mu, and mu = m "
                    "when m > 0); every choice gives a valid bound.",
                ),
                reference=REFERENCE,
                rigor="proven",
            ),
            ConstantInfo(
                name="growth rate of the energy",
                symbol="r",
                expression=display_text(rate, ns),
                latex=display_latex(rate, ns),
                derivation=(
                    "E' = 2 (w_t, w_tt) + 2 sum_i k_i (w_i, w_it) + 2 mu (w, w_t).",
                    "By parts: 2 k_i (w_i, w_it) = -2 k_i (w_ii, w_t) + 2 k_i int_dOmega "
                    "n_i w_t w_i dS (the boundary flux B(t)).",
                    "With the equation: E' = 2 (w_t, R) - 2 b ||w_t||^2 - 2 (a.grad w, w_t) "
                    "+ 2 (mu - m)(w, w_t) + B(t).",
                    "Young: 2 (w_t, R) <= lambda ||w_t||^2 + ||R||^2/lambda; 2 |a_i| |w_i| |w_t| "
                    "<= (|a_i|/sqrt(k_i)) (||w_t||^2 + k_i ||w_i||^2); 2 |mu - m| |(w, w_t)| "
                    "<= |mu - m| (theta ||w||^2 + ||w_t||^2/theta).",
                    "Coefficients: ||w_t||^2: lambda + beta + |mu - m|/theta (beta = -2 b + "
                    "sum_i |a_i|/sqrt(k_i)); k_i ||w_i||^2: |a_i|/sqrt(k_i); mu ||w||^2: "
                    "|mu - m| theta/mu.",
                    "theta = mu (beta + sqrt(beta^2 + 4 (mu-m)^2/mu)) / (2 |mu - m|) equalises "
                    "the first and last; hence E' <= (lambda + r) E + ||R||^2/lambda + B(t).",
                    "lambda is chosen per output to minimise the bound (every lambda > 0 is "
                    "valid).",
                ),
                reference=REFERENCE,
                rigor="proven",
            ),
            ConstantInfo(
                name="initial energy",
                symbol="E(t0)",
                expression=(
                    "mu*||R_0||^2 + ||R_t0||^2 + "
                    + " + ".join(
                        f"({to_text(self.sym[f'k_{a}'], ns)})*||d_{a} R_0||^2" for a in axes
                    )
                ),
                latex=r"\mu\|R_0\|^2 + \|R_{t,0}\|^2 + \sum_i k_i \|\partial_i R_0\|^2",
                derivation=(
                    "At t0: w = R_0 (component initial), w_t = R_t0 (initial_t), "
                    "w_i = d_i R_0 (initial_<axis>).",
                    "One quadrature of the combined integrand on the initial points (its "
                    "allowance covers the whole initial energy).",
                ),
                reference=REFERENCE,
                rigor="proven",
            ),
        ]
        for a in self.problem.domain.dirichlet_axes:
            ka = self.sym[f"k_{a}"]
            out.append(
                ConstantInfo(
                    name=f"boundary flux on the faces normal to {a}",
                    symbol=f"B_{a}(t)",
                    expression=(
                        f"2*({to_text(ka, ns)})*int_F |d_t R_b| (G_u_{a}(t) + G_model_u_{a}(t))"
                    ),
                    latex=(
                        rf"2 ({to_latex(ka, ns)})\int_F |\partial_t R_b|\,"
                        rf"(G_{{u,{a}}}(t) + G_{{u^*,{a}}}(t))"
                    ),
                    derivation=(
                        "On a Dirichlet face w = R_b (boundary residual), so w_t = d_t R_b "
                        "(component boundary_t) is known exactly.",
                        f"|w_{a}| <= |u_{a}| + |u_model_{a}| <= G_u + G_model on the face.",
                        f"Hence 2 k_{a} int n_{a} w_t w_{a} <= 2 k_{a} int |d_t R_b| "
                        "(G_u + G_model): the boundary residual enters the squared bound to "
                        "the first power.",
                    ),
                    reference=REFERENCE,
                    rigor="assumed",
                )
            )
        for a in self.problem.domain.periodic_axes:
            ka = self.sym[f"k_{a}"]
            out.append(
                ConstantInfo(
                    name=f"periodicity mismatch along {a}",
                    symbol=f"P_{a}(t)",
                    expression=(
                        f"2*({to_text(ka, ns)})*int (V_u + V_model) |P_{a}| + (G_u_{a} + "
                        f"G_model_u_{a}) |P_t|"
                    ),
                    latex=(
                        rf"2 ({to_latex(ka, ns)})\int (V_u + V_{{u^*}})|P_{{{a}}}| + "
                        rf"(G_{{u,{a}}} + G_{{u^*,{a}}})|P_t|"
                    ),
                    derivation=(
                        f"The flux through the face pair is 2 k_{a} int (w_t w_{a})|hi - "
                        f"(w_t w_{a})|lo = 2 k_{a} int w_t|hi P_{a} + w_{a}|lo P_t.",
                        f"u is periodic, so P_{a} = u_model_{a}(hi) - u_model_{a}(lo) (component "
                        f"periodic_{a}) and P_t = u_model_t(hi) - u_model_t(lo) (periodic_t).",
                        "|w_t| <= V_u + V_model (sup_abs_u_t, sup_abs_model_u_t), "
                        f"|w_{a}| <= G_u + G_model.",
                    ),
                    reference=REFERENCE,
                    rigor="assumed",
                )
            )
        return out

    # -- the inequality --------------------------------------------------------------------
    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        grid = plan.time
        assert grid is not None
        n_t = grid.size
        domain = self.problem.domain
        axes = domain.space_axes
        interior = plan.components["interior"]
        r_sq = np.square(res["interior"] / self.alpha)
        plain_residual = _plain_slices(interior, r_sq, n_t)
        info: dict[str, SourceInfo] = {}
        warnings: list[str] = []
        forcing: dict[str, FloatArray] = {}
        if domain.dirichlet_axes:
            forcing.update(self._dirichlet_terms(plan, res, reg, info))
        for a in domain.periodic_axes:
            forcing.update(self._periodic_terms(a, plan, res, reg, info, warnings))
        init = plan.components["initial"]
        parts = {
            "u": float(np.dot(init.weights, np.square(res["initial"]))),
            "u_t": float(np.dot(plan.components["initial_t"].weights, np.square(res["initial_t"]))),
            "grad": sum(
                self.k[a]
                * float(
                    np.dot(plan.components[f"initial_{a}"].weights, np.square(res[f"initial_{a}"]))
                )
                for a in axes
            ),
        }
        length = grid.t_end - grid.t0
        mu = self._choose_mu(parts, plain_residual, forcing, grid.weights, length)
        rate = energy_rate(mu, self.b, self.m, self.transport)
        initial_energy = self._initial_energy(plan, res, mu, warnings)
        residual = slice_integrals(interior, r_sq, n_t) / mu
        scaled = {k: v / mu for k, v in forcing.items()}
        constants = self._energy_constants(initial_energy, rate, mu)
        constants.append(
            ConstantInfo(
                name="energy weight",
                symbol="mu",
                expression=f"{mu:.17g}",
                latex=r"\mu",
                derivation=(
                    f"mu = {mu:.6g} (time interval length {length:.6g}); the rate at this "
                    f"weight is r = {rate:.6g}.",
                    "Chosen to minimise log((mu ||R_0||^2 + ||R_t0||^2 + sum_i k_i ||d_i R_0||^2 "
                    "+ (T - t0) int ||R||^2 + int B) / mu) + r(mu) (T - t0) over mu in "
                    "[1e-4, 1e4]/(T - t0)^2 (41 values) and mu = m when m > 0.",
                    "The choice affects only the tightness: the inequality holds for every mu.",
                ),
                reference=REFERENCE,
                value=mu,
                rigor="proven",
            )
        )
        base = EnergyInequality(
            base_rate=Rate(constant=rate),
            initial=initial_energy,
            initial_info=SourceInfo(
                "initial energy",
                "E(t0)/mu",
                "(mu ||R_0||^2 + ||R_t0||^2 + sum_i k_i ||d_i R_0||^2) / mu",
                "heuristic",
                "quadrature of the initial residual and its derivatives",
            ),
            residual=residual,
            residual_info=SourceInfo(
                "interior residual",
                "||R||^2/(lambda mu)",
                "int_t0^t e^{A(s,t)} ||R(s)||^2 / (lambda mu) ds",
                "heuristic",
                "quadrature of the interior residual (divided by the u_tt coefficient)",
            ),
            forcing=scaled,
            forcing_info=info,
            nonnegative=tuple(scaled),
            constants=constants,
            warnings=warnings,
            failed_hypotheses=[
                *data_contradictions(self.problem, plan, res, reg),
                *self._velocity_contradictions(plan, res, reg),
            ],
            rate_rigor="proven",
            inputs={"mu": mu, "rate": rate},
        )
        if "boundary_energy_flux" in forcing and domain.dimension == 1:
            lifted = self._lifted_inequality(
                inputs, base.failed_hypotheses, mu, residual * mu, initial_energy
            )
            if isinstance(lifted, str):
                base.warnings.append(f"boundary lifting not used: {lifted}")
            else:
                base.label = "boundary flux estimate"
                base.alternatives.append(lifted)
        return base

    # -- the boundary lifting (1-D Dirichlet) ------------------------------------------------
    def _lifted_inequality(
        self,
        inputs: CertifyInputs,
        failed: list[str],
        mu: float,
        residual: FloatArray,
        initial_energy: float,
    ) -> EnergyInequality | str:
        """The estimate for ``v = w - B r`` (zero trace, no boundary energy flux) plus
        ``||B r||``: steps W1-W7 of docs/theory/wave.md, "Boundary lifting". ``mu``, the
        interior residual slices ``residual`` and ``initial_energy`` (``E(t0)/mu``) are those of
        the flux estimate (same integrals, no second quadrature statement)."""
        plan, res = inputs.plan, inputs.residuals
        grid = plan.time
        assert grid is not None
        domain = self.problem.domain
        if domain.dimension != 1 or len(domain.dirichlet_axes) != 1:
            return "the lifting is implemented for one space axis with Dirichlet ends"
        traces = face_traces(plan, res)
        if isinstance(traces, str):
            return traces
        axis = domain.dirichlet_axes[0]
        length = domain.length(axis)
        r = np.stack([traces.low, traces.high], axis=1)
        r_t = np.stack([traces.low_t, traces.high_t], axis=1)
        # W1: r_t must be the derivative of r (as for the parabolic lifting), and r_tt comes
        # from the time interpolant of r_t, cross-checked against the second derivative of
        # the interpolant of r; their difference is added to ||L B r|| (W3)
        refused = rate_mismatch(grid, r, r_t)
        if refused is not None:
            return refused
        r_tt = interpolant_rate(grid, r_t)
        r_tt_other = interpolant_rate(grid, interpolant_rate(grid, r))
        spread = np.abs(r_tt - r_tt_other)
        scale2 = max(float(np.max(np.abs(r_tt))), float(np.max(np.abs(r_tt_other))))
        if float(np.max(spread)) > LIFTING_RATE_TOLERANCE * scale2 + 1e-300:
            return (
                "the second time derivative of the boundary residual is not determined by the "
                f"samples (two interpolants differ by {float(np.max(spread)):.3g}, largest "
                f"magnitude {scale2:.3g}): use more time nodes"
            )
        # W3: L B r = (r'' + b r' + m r) phi + a (r_b - r_a)/L, linear in x between the ends
        jump = (r[:, 1] - r[:, 0]) / length
        a_x = self.a.get(axis, 0.0)
        ends = r_tt + self.b * r_t + self.m * r + a_x * jump[:, None]
        lb_norm = lifting_norm(length, ends[:, 0], ends[:, 1]) + lifting_norm(
            length, spread[:, 0], spread[:, 1]
        )
        forcing_v = np.square(np.sqrt(np.maximum(residual, 0.0)) + lb_norm)
        # W4: initial data of v; Minkowski in the energy norm:
        # sqrt(E_v(t0)) <= sqrt(E_w(t0)) + sqrt(E(B r)(t0))
        start = at_output_times(grid, np.concatenate([r, r_t], axis=1))[0]
        br0 = float(lifting_norm(length, start[0:1], start[1:2])[0])
        brt0 = float(lifting_norm(length, start[2:3], start[3:4])[0])
        brx0 = abs(float(start[1] - start[0])) / math.sqrt(length)
        lift_energy = (mu * br0**2 + brt0**2 + self.k[axis] * brx0**2) / mu
        initial_v = (math.sqrt(max(initial_energy, 0.0)) + math.sqrt(lift_energy)) ** 2
        rate = energy_rate(mu, self.b, self.m, self.transport)
        # W7: ||w|| <= ||v|| + ||B r||
        b_nodes = lifting_norm(length, r[:, 0], r[:, 1])
        constants = self._energy_constants(initial_v, rate, mu)
        constants.append(
            ConstantInfo(
                name="boundary lifting",
                symbol="B r",
                expression=(
                    f"max ||B r|| = {float(np.max(b_nodes)):.6g}, "
                    f"max ||L B r|| = {float(np.max(lb_norm)):.6g}, mu = {mu:.6g}"
                ),
                latex=r"B r = r_a \frac{b - x}{L} + r_b \frac{x - a}{L}",
                derivation=(
                    "e = v + B r, B r the linear interpolant of the boundary residual between "
                    "the ends; v has zero trace, so its energy estimate has no boundary flux.",
                    "||L B r|| = sqrt(L/3 (P^2 + P Q + Q^2)), P, Q = r'' + b r' + m r + "
                    "a (r_b - r_a)/L at the ends; r'' from the time interpolant of boundary_t, "
                    "plus the difference to the second derivative of the interpolant of r.",
                    "v(t0) = R_0 - B r(t0), v_t(t0) = R_t0 - B r_t(t0), "
                    "v_x(t0) = d_x R_0 - (r_b - r_a)(t0)/L; sqrt(E_v(t0)) <= sqrt(E_w(t0)) + "
                    "sqrt(E(B r)(t0)) (Minkowski in the energy norm), same mu as the flux "
                    "estimate.",
                ),
                reference=REFERENCE,
                value=float(np.max(b_nodes)),
                rigor="heuristic",
            )
        )
        return EnergyInequality(
            base_rate=Rate(constant=rate),
            initial=initial_v,
            initial_info=SourceInfo(
                "initial energy of the lifted error",
                "E_v(t0)/mu",
                "(sqrt(E_w(t0)) + sqrt(mu ||B r||^2 + ||B r_t||^2 + k (r_b - r_a)^2/L)(t0))^2 / mu",
                "heuristic",
                "quadrature of the initial residuals; r, r_t at t0 from their time interpolants",
            ),
            residual=forcing_v / mu,
            residual_info=SourceInfo(
                "interior residual of the lifted error",
                "(||R|| + ||L B r||)^2/(lambda mu)",
                "int_t0^t e^{A(s,t)} (||R(s)|| + ||L B r(s)||)^2 / (lambda mu) ds",
                "heuristic",
                "quadrature of the interior residual; ||L B r|| in closed form from the "
                "boundary residual, boundary_t and its time interpolant",
            ),
            constants=constants,
            warnings=[
                "boundary lifting: e = v + B r with B r the linear interpolant of the boundary "
                "residual between the ends; v has zero trace, so the energy estimate for v has "
                "no boundary energy flux (no gradient bounds are used), and "
                "||e|| <= ||v|| + ||B r||."
            ],
            failed_hypotheses=list(failed),
            rate_rigor="proven",
            inputs={"mu": mu, "rate": rate},
            norm_addition=lifting_addition(grid, length, r),
            label="boundary lifting",
        )

    def _energy_constants(self, initial: float, rate: float, mu: float) -> list[ConstantInfo]:
        """The family's constants with the initial energy ``E(t0)/mu``, the rate and
        ``E(t0)`` filled in."""
        constants = [c.with_value(None) for c in self.constants()]
        constants[0] = constants[0].with_value(initial, "heuristic")
        constants[1] = constants[1].with_value(rate, "proven")
        constants[2] = constants[2].with_value(initial * mu, "heuristic")
        return constants

    def _choose_mu(
        self,
        parts: Mapping[str, float],
        residual: FloatArray,
        forcing: Mapping[str, FloatArray],
        time_weights: FloatArray,
        length: float,
    ) -> float:
        """The energy weight minimising a proxy of the final-time bound (tightness only)."""
        candidates = [float(v) for v in _MU_GRID / length**2]
        if self.m > 0:
            candidates.append(self.m)
        sources = length * float(np.dot(time_weights, residual)) + sum(
            float(np.dot(time_weights, np.maximum(v, 0.0))) for v in forcing.values()
        )
        fallback = self.m if self.m > 0 else 1.0 / length**2

        def proxy(mu: float) -> float:
            total = mu * parts["u"] + parts["u_t"] + parts["grad"] + sources
            if total <= 0:
                return -math.inf
            rate = energy_rate(mu, self.b, self.m, self.transport)
            return math.log(total) - math.log(mu) + rate * length

        scores = [(proxy(mu), mu) for mu in candidates]
        if all(s == -math.inf for s, _ in scores):
            return fallback
        return min(scores)[1]

    def _initial_energy(
        self, plan: Plan, res: Mapping[str, FloatArray], mu: float, warnings: list[str]
    ) -> float:
        """``E(t0)/mu`` as one quadrature (with its allowance) when the points coincide."""
        init = plan.components["initial"]
        names = ["initial_t", *[f"initial_{a}" for a in self.problem.domain.space_axes]]
        same = all(
            plan.components[n].size == init.size
            and np.array_equal(plan.components[n].points, init.points)
            and np.array_equal(plan.components[n].weights, init.weights)
            for n in names
        )
        weights = {"initial_t": 1.0, **{f"initial_{a}": self.k[a] for a in self.k}}
        if same:
            integrand = mu * np.square(res["initial"])
            for n in names:
                integrand = integrand + weights[n] * np.square(res[n])
            return total_integral(init, integrand) / mu
        warnings.append(
            "the initial derivative components do not share the points of 'initial' "
            "(custom plan): their integrals carry no quadrature allowance"
        )
        value = mu * total_integral(init, np.square(res["initial"]))
        for n in names:
            comp = plan.components[n]
            value += weights[n] * float(np.dot(comp.weights, np.square(res[n])))
        return value / mu

    def _dirichlet_terms(
        self,
        plan: Plan,
        res: Mapping[str, FloatArray],
        reg: Mapping[str, RegularityValue],
        info: dict[str, SourceInfo],
    ) -> dict[str, FloatArray]:
        """``2 k_i int_F |d_t R_b| (G_u,i + G_m,i)`` per time node, summed over faces."""
        grid = plan.time
        assert grid is not None
        comp = plan.components["boundary_t"]
        assert comp.face_index is not None
        per_face = face_slice_integrals(comp, np.abs(res["boundary_t"]), grid.size)
        total = np.zeros(grid.size)
        for f, face in enumerate(comp.faces):
            if not np.any(per_face[f]):
                continue
            g_u = best_of(reg, gradient_keys(face.axis, False, self._dim), grid.nodes)
            g_m = best_of(reg, gradient_keys(face.axis, True, self._dim), grid.nodes)
            if g_u is None or g_m is None:
                raise RegularityError(
                    "regularity_missing",
                    f"boundary_t is not zero on the faces normal to {face.axis}, so the bound "
                    f"needs sup_abs_u_{face.axis} and sup_abs_model_u_{face.axis}",
                    f"regularity.sup_abs_u_{face.axis}",
                )
            total += 2 * self.k[face.axis] * per_face[f] * (g_u[0] + g_m[0])
        if not np.any(total):
            return {}
        info["boundary_energy_flux"] = SourceInfo(
            "boundary energy flux",
            "2 k int |d_t R_b| (G_u + G_m) / mu",
            "2 int_F k_i |d_t R_b(t)| (G_u_i(t) + G_model_u_i(t)) / mu",
            "heuristic",
            "rests on the asserted gradient bounds (assumed) and the quadrature",
        )
        return {"boundary_energy_flux": total}

    def _periodic_terms(
        self,
        axis: str,
        plan: Plan,
        res: Mapping[str, FloatArray],
        reg: Mapping[str, RegularityValue],
        info: dict[str, SourceInfo],
        warnings: list[str],
    ) -> dict[str, FloatArray]:
        """``2 k_a int (V_u + V_m)|P_a| + (G_u + G_m)|P_t|`` on the face pair of one axis."""
        grid = plan.time
        assert grid is not None
        comp = plan.components["periodic_t"]
        assert comp.face_index is not None
        f = [face.axis for face in comp.faces].index(axis)
        mask = comp.face_index == f
        p_t = np.where(mask, np.abs(res["periodic_t"]), 0.0)
        p_a = np.where(mask, np.abs(res[f"periodic_{axis}"]), 0.0)
        if not np.any(p_t) and not np.any(p_a):
            warnings.append(
                f"the periodicity residuals along {axis} are zero at every sample; the model "
                "is taken to be exactly periodic along it"
            )
            return {}
        total = np.zeros(grid.size)
        if np.any(p_a):
            v_u = best_of(reg, ("sup_abs_u_t",), grid.nodes)
            v_m = best_of(reg, ("sup_abs_model_u_t",), grid.nodes)
            if v_u is None or v_m is None:
                raise RegularityError(
                    "regularity_missing",
                    f"periodic_{axis} is not zero, so the bound needs sup_abs_u_t and "
                    "sup_abs_model_u_t",
                    "regularity.sup_abs_u_t",
                )
            integral = face_slice_integrals(comp, p_a, grid.size)[f]
            total += 2 * self.k[axis] * integral * (v_u[0] + v_m[0])
        if np.any(p_t):
            g_u = best_of(reg, gradient_keys(axis, False, self._dim), grid.nodes)
            g_m = best_of(reg, gradient_keys(axis, True, self._dim), grid.nodes)
            if g_u is None or g_m is None:
                raise RegularityError(
                    "regularity_missing",
                    f"periodic_t is not zero along {axis}, so the bound needs "
                    f"sup_abs_u_{axis} and sup_abs_model_u_{axis}",
                    f"regularity.sup_abs_u_{axis}",
                )
            integral = face_slice_integrals(comp, p_t, grid.size)[f]
            total += 2 * self.k[axis] * integral * (g_u[0] + g_m[0])
        name = f"periodic_{axis}_mismatch"
        info[name] = SourceInfo(
            f"periodicity mismatch along {axis}",
            f"P_{axis}(t) / mu",
            f"2 k_{axis} int (V_u + V_m)|P_{axis}| + (G_u + G_m)|P_t|, divided by mu",
            "heuristic",
            "rests on sup bounds (assumed) and the quadrature",
        )
        return {name: total}

    def _velocity_contradictions(
        self, plan: Plan, res: Mapping[str, FloatArray], reg: Mapping[str, RegularityValue]
    ) -> list[str]:
        """``sup_abs_u_t`` below the initial velocity, or the model's bound below its values."""
        if self.velocity is None:
            return []
        assert plan.time is not None
        init = plan.components["initial_t"]
        axes = list(init.axes)
        v0 = evaluate_on(self.velocity, self.problem, axes, init.points)
        t0 = np.array([plan.time.t0])
        found: list[str] = []
        for key, observed in (
            ("sup_abs_u_t", np.abs(v0)),
            ("sup_abs_model_u_t", np.abs(v0 + res["initial_t"])),
        ):
            if key not in reg:
                continue
            bad = np.flatnonzero(_exceeds(observed, reg[key].at(t0)))
            if bad.size:
                i = int(bad[np.argmax(observed[bad])])
                where = ", ".join(
                    f"{a} = {float(v):.6g}" for a, v in zip(axes, init.points[i], strict=True)
                )
                found.append(
                    f"{key} = {reg[key].describe()} is below the "
                    f"{'initial velocity' if key == 'sup_abs_u_t' else 'model velocity'} "
                    f"{observed[i]:.6g} at {where}, t = {plan.time.t0:g}"
                )
        return found


def _plain_slices(component: Component, integrand: FloatArray, n_times: int) -> FloatArray:
    """Per-time-node integrals without any quadrature allowance (for the weight choice only:
    the same whether or not a certificate's quadrature log is active)."""
    assert component.time_index is not None and component.slice_weights is not None
    return np.bincount(
        component.time_index, weights=component.slice_weights * integrand, minlength=n_times
    ).astype(np.float64)
