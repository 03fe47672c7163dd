"""Semilinear parabolic equations ``u_t + a.grad u = sum_i k_i u_{x_i x_i} + g(u) + s(x, t)``.

Constant ``k_i >= 0`` and ``a_i`` per axis (1 to 3 axes), an autonomous nonlinear reaction
``g(u)`` (Allen-Cahn ``u - u^3``, Fisher-KPP ``r u (1 - u)``, Nagumo ``u (1 - u)(u - a)``, ...)
and any source ``s(x, t)``; Dirichlet or periodic per axis. The derivation is in
``docs/theory/semilinear-parabolic.md``. With ``w = u_model - u`` the error equation is

    w_t + a.grad w - sum_i k_i w_ii - (g(u_model) - g(u)) = R,

and the one-sided Lipschitz bound ``(g(u_model) - g(u)) w <= l w^2``, ``l = sup g'`` over an
interval holding both ``u`` and ``u_model`` (or over all of R when ``g'`` is bounded above there,
e.g. ``g = u - u^3``: ``g' = 1 - 3u^2 <= 1``), gives for ``Y = ||w||^2``

    Y' <= (lambda + 2 l - F) Y + ||R||^2/lambda + B(t)

with the boundary terms ``B`` of the linear family and the Friedrichs decay ``F`` of the axes on
which the model satisfies the boundary condition exactly. References: the energy method for
semilinear parabolic equations (Evans, "Partial Differential Equations", 2nd ed. 2010, sec. 9.2;
Mishra & Molinaro, IMA J. Numer. Anal. 43 (2023) 1-43, the semilinear parabolic example).
"""

from __future__ import annotations

import contextlib
import math
from collections.abc import Mapping

import numpy as np
import sympy

from boundsvc.errors import RegularityError
from boundsvc.expr import to_latex, to_text
from boundsvc.families._analysis import AnalysedProblem
from boundsvc.families._base import (
    CertifyInputs,
    Classified,
    ConstantInfo,
    EnergyInequality,
    Family,
    FloatArray,
    Requirement,
    Rigor,
    SourceInfo,
)
from boundsvc.families._common import data_contradictions, gradient_keys
from boundsvc.families._linear import affine_split, field_names, foreign_field_names
from boundsvc.families.advection_diffusion import (
    FRIEDRICHS_REFERENCE,
    INTERVAL_REFERENCE,
    LIFTED_INITIAL_INFO,
    LIFTING_COMPONENT,
    dirichlet_terms,
    exact_boundary_axes,
    face_traces,
    friedrichs_warning,
    lifting_addition,
    lifting_constant,
    lifting_norm,
    offending_term,
    periodic_terms,
    rate_mismatch,
)
from boundsvc.gronwall import Rate
from boundsvc.intervals import IntervalError, certified_max, enclose
from boundsvc.quadrature import slice_integrals, total_integral
from boundsvc.regularity import RegularityValue

REFERENCE = (
    "Energy method for semilinear parabolic equations: L. C. Evans, Partial Differential "
    "Equations, 2nd ed., AMS 2010, sec. 9.2; residual stability framework and its semilinear "
    "parabolic example: S. Mishra, R. Molinaro, IMA J. Numer. Anal. 43 (2023) 1-43; "
    "Gronwall: T. H. Gronwall, Ann. Math. 20 (1919) 292-296."
)


def _cmax(expr: sympy.Expr, box: Mapping[sympy.Symbol, tuple[float, float]]) -> float:
    """Certified upper bound of ``sup expr`` over the box (tight tolerances: 1-D boxes)."""
    return certified_max(expr, box, max_boxes=2000, rel_tol=1e-7)


def _cauchy_bound(poly: sympy.Poly) -> float:
    """A certified upper bound of |root| for the real roots of ``poly`` (Cauchy's bound
    ``1 + max_i |a_i| / |a_n|``, each coefficient enclosed in interval arithmetic)."""
    coeffs = poly.all_coeffs()
    lead = enclose(sympy.Abs(coeffs[0]), {})[0]
    if lead <= 0:
        raise IntervalError("the leading coefficient cannot be bounded away from zero")
    biggest = max((enclose(sympy.Abs(c), {})[1] for c in coeffs[1:]), default=0.0)
    return math.nextafter(1.0 + biggest / lead, math.inf) * (1 + 1e-12)


def global_sup(gp: sympy.Expr, u: sympy.Symbol) -> tuple[float, str] | None:
    """A certified upper bound of ``sup_R g'`` when ``g'`` is bounded above on all of R.

    Two certified routes, the smaller wins: (1) a single interval enclosure over
    ``(-inf, inf)`` (exact for e.g. ``1 - 3u^2`` or ``cos(u)``); (2) for a polynomial of even
    degree with a negative leading coefficient, the maximum is attained at a real root of
    ``g''``, all of which lie in ``[-B, B]`` (Cauchy's root bound), so ``sup_R g' =
    max_[-B, B] g'``, certified by interval branch and bound."""
    found: list[tuple[float, str]] = []
    try:
        hi = enclose(gp, {u: (-math.inf, math.inf)})[1]
        if math.isfinite(hi):
            found.append((hi, "interval enclosure of g' over the whole real line"))
    except IntervalError:
        pass
    if gp.is_polynomial(u):
        poly = sympy.Poly(gp, u)
        degree = poly.degree()
        if degree <= 0:
            found.append((enclose(gp, {})[1], "g' is constant"))
        elif degree % 2 == 0 and bool(poly.LC().is_negative):
            with contextlib.suppress(IntervalError):
                found.append(_polynomial_sup(gp, u, degree))
    return min(found, key=lambda f: f[0]) if found else None


def _polynomial_sup(gp: sympy.Expr, u: sympy.Symbol, degree: int) -> tuple[float, str]:
    """``sup_R g'`` for a polynomial ``g'`` of even degree with a negative leading coefficient:
    the maximum is attained at a real root of ``g''``. With rational coefficients the roots are
    isolated exactly (sympy's real-root isolation) and ``g'`` is enclosed on each isolating
    interval; otherwise all roots lie in ``[-B, B]`` (Cauchy's bound) and ``g'`` is maximised
    there by interval branch and bound."""
    second = sympy.Poly(sympy.diff(gp, u), u)
    if second.domain.is_QQ or second.domain.is_ZZ:
        boxes = [
            (float(a), float(b)) for (a, b), _ in second.intervals(eps=sympy.Rational(1, 10**12))
        ]
        # widen by one ulp each way: float(a) may round the rational end inwards
        value = max(
            _cmax(gp, {u: (math.nextafter(a, -math.inf), math.nextafter(b, math.inf))})
            for a, b in boxes
        )
        return (
            value,
            f"g' is a polynomial of even degree {degree} with a negative leading coefficient: "
            "its maximum over R is attained at a real root of g''; the roots were isolated "
            f"exactly ({len(boxes)} interval(s) of width <= 1e-12) and g' enclosed on each",
        )
    bound = _cauchy_bound(second)
    value = _cmax(gp, {u: (-bound, bound)})
    return (
        value,
        f"g' is a polynomial of even degree {degree} with a negative leading coefficient: its "
        "maximum over R is attained at a real root of g'', all of which lie in "
        f"[-{bound:.6g}, {bound:.6g}] (Cauchy's root bound); interval branch and bound there",
    )


class SemilinearParabolicFamily(Family):
    """Semilinear parabolic equations with constant diffusion and an autonomous reaction."""

    id = "semilinear-parabolic"
    title = "Semilinear parabolic equation (constant diffusion, nonlinear reaction g(u))"
    equation_form = "u_t + a.grad(u) = sum_i k_i u_{x_i x_i} + g(u) + s(x, t),  k_i >= 0 constant"
    hypotheses = (
        "The exact solution u is classical (C^1 in t, C^2 in x) on the closed domain.",
        "Dirichlet boundary: the boundary residual is u_model - u on the boundary (the boundary "
        "data equal the exact solution's trace).",
        "Regularity values bound |d u/d x_i| (and the model's) on the boundary faces at each time.",
        "g is C^1; when g' is not bounded above on R, |u| <= sup_abs_u and |u_model| <= "
        "sup_abs_model_u on the whole space-time domain.",
        "Residual integrals are taken by the plan's quadrature (see each term's rigor).",
    )
    bounded_quantities = ("l2_space_time", "l2_final_time", "time_profile")
    reference = REFERENCE
    theory_document = "docs/theory/semilinear-parabolic.md"
    typical_regularity = ("sup_abs_u_x", "sup_abs_model_u_x")
    typical_optional = ("sup_abs_u", "sup_abs_model_u", "sup_grad_u", "sup_grad_model_u")
    typical_components = ("interior", "initial", "boundary")

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
        ut = ns.field(name, ("t",))
        first = {a: ns.field(name, (a,)) for a in axes}
        second = {a: ns.field(name, (a, a)) for a in axes}
        gens = [ut, *first.values(), *second.values()]
        expr = problem.numeric[0]
        others = foreign_field_names(expr, {u, *gens}, ns)
        if others:
            return (
                f"the equation contains {', '.join(others)}; a semilinear parabolic equation has "
                "u_t, first and pure second space derivatives only"
            )
        split = affine_split(expr, gens)
        if isinstance(split, str):
            return (
                "the equation is not linear in the derivatives of u (the term "
                f"{offending_term(expr, gens, ns)}); a semilinear equation is "
                "u_t = sum_i k_i u_{x_i x_i} + g(u) + s"
            )
        coords = {ns.coordinate(c) for c in ("t", *axes)}
        alpha = split.coefficients.get(ut, sympy.Integer(0))
        if alpha == 0:
            return "the equation has no time derivative u_t"
        if alpha.free_symbols:
            return "the coefficient of u_t must be a non-zero number"
        diffusion: dict[str, sympy.Expr] = {}
        for a in axes:
            k = sympy.simplify(-split.coefficients.get(second[a], sympy.Integer(0)) / alpha)
            if k.has(u):
                return (
                    f"the coefficient of u_{a}{a} depends on u: the equation is quasilinear "
                    "(diffusion depending on the solution), not semilinear, and no family of "
                    "this version covers it"
                )
            if k.free_symbols:
                return (
                    f"the diffusion coefficient along {a} depends on "
                    + ", ".join(sorted(ns.display_name(s) for s in k.free_symbols))
                    + "; this family has constant diffusion (variable coefficients are covered "
                    "by the linear family only)"
                )
            if k < 0:
                return (
                    f"the diffusion coefficient along {a} is {k} < 0 (backward diffusion): "
                    "the problem is ill-posed"
                )
            diffusion[a] = k
        advection: dict[str, sympy.Expr] = {}
        for a in axes:
            b = sympy.simplify(split.coefficients.get(first[a], sympy.Integer(0)) / alpha)
            if b.has(u):
                return (
                    f"the coefficient of u_{a} depends on u: a nonlinear transport term like "
                    "u*u_x is a conservation law (f(u)_x), not a semilinear reaction"
                )
            if b.free_symbols:
                return (
                    f"the coefficient of u_{a} depends on the coordinates; this family has "
                    "constant advection only"
                )
            advection[a] = b
        reaction = sympy.Integer(0)
        for term in sympy.Add.make_args(sympy.expand(split.remainder)):
            if term.has(u):
                if term.free_symbols & coords:
                    return (
                        f"the reaction term {to_text(term, ns)} depends on u and on the "
                        "coordinates; this family needs an autonomous reaction g(u)"
                    )
                reaction += term
            elif term.free_symbols - coords:
                return "the source term depends on something other than x and t"
        g = sympy.simplify(-reaction / alpha)
        if not g.has(u):
            return "the equation has no reaction term g(u)"
        gp = sympy.diff(g, u)
        try:
            enclose(gp, {u: (-1.0, 1.0)})
        except IntervalError as exc:
            return (
                f"the derivative g'(u) = {to_text(gp, ns)} has no interval enclosure ({exc}); "
                "the one-sided Lipschitz constant cannot be certified"
            )
        symbolic = affine_split(problem.residuals[0], gens)
        assert not isinstance(symbolic, str)
        s_alpha = symbolic.coefficients.get(ut, sympy.Integer(1))
        s_reaction = sympy.Add(
            *[t for t in sympy.Add.make_args(sympy.expand(symbolic.remainder)) if t.has(u)]
        )
        return ClassifiedSemilinear(
            family=self,
            problem=problem,
            u=u,
            g=g,
            advection=advection,
            diffusion=diffusion,
            symbolic_g=sympy.simplify(-s_reaction / s_alpha),
            symbolic_diffusion={
                a: sympy.simplify(-symbolic.coefficients.get(second[a], sympy.Integer(0)) / s_alpha)
                for a in axes
            },
            fields=field_names(expr, ns),
            time_coefficient=float(alpha),
        )


class ClassifiedSemilinear(Classified):
    """A recognised semilinear parabolic problem."""

    def __init__(
        self,
        *,
        family: Family,
        problem: AnalysedProblem,
        u: sympy.Symbol,
        g: sympy.Expr,
        advection: dict[str, sympy.Expr],
        diffusion: dict[str, sympy.Expr],
        symbolic_g: sympy.Expr,
        symbolic_diffusion: dict[str, sympy.Expr],
        fields: list[str],
        time_coefficient: float = 1.0,
    ) -> None:
        self.family = family
        self.problem = problem
        self.u = u
        self.g = g
        self.gp = sympy.expand(sympy.diff(g, u))
        self.a_expr = advection
        self.k_expr = diffusion
        self.k = {a: float(v) for a, v in diffusion.items()}
        self.sym_g = symbolic_g
        self.sym_k = symbolic_diffusion
        self.fields = fields
        self.time_coefficient = time_coefficient
        self.global_l = global_sup(self.gp, u)

    @property
    def _dim(self) -> int:
        return self.problem.domain.dimension

    def components(self) -> list[str]:
        names = ["interior", "initial"]
        if self.problem.domain.dirichlet_axes:
            names.append("boundary")
        if self.problem.domain.periodic_axes:
            names.append("periodic")
            names += [f"periodic_{a}" for a in self.problem.domain.periodic_axes if self.k[a] > 0]
        return names

    def optional_components(self) -> list[str]:
        """``boundary_t`` (d/dt of the boundary residual) enables the boundary lifting on a
        1-D Dirichlet interval (docs/theory/semilinear-parabolic.md, steps S1-S8)."""
        domain = self.problem.domain
        if domain.dimension == 1 and domain.dirichlet_axes:
            return [LIFTING_COMPONENT]
        return []

    def requirements(self) -> list[Requirement]:
        reqs = []
        if self.global_l is None:
            reqs.append(
                Requirement(
                    ("sup_abs_u",),
                    "range of u for the one-sided Lipschitz constant sup g'",
                    "sup |u| of the exact solution",
                )
            )
            reqs.append(
                Requirement(
                    ("sup_abs_model_u",),
                    "range of the model for the one-sided Lipschitz constant sup g'",
                    "sup |u_model|",
                )
            )
        for a in self.problem.domain.dirichlet_axes:
            if self.k[a] > 0:
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
        keys = ["sup_abs_u", "sup_abs_model_u"]
        for a in self.problem.domain.periodic_axes:
            if self.k[a] > 0:
                keys += [
                    k
                    for k in gradient_keys(a, False, self._dim) + gradient_keys(a, True, self._dim)
                    if k not in keys
                ]
        return keys

    def description(self) -> dict[str, object]:
        ns = self.problem.namespace
        return {
            "form": self.family.equation_form,
            "reaction": to_text(self.sym_g, ns),
            "reaction_derivative": to_text(sympy.expand(self.gp), ns),
            "diffusion": {a: to_text(v, ns) for a, v in self.sym_k.items()},
            "advection": {a: to_text(v, ns) for a, v in self.a_expr.items()},
            "one_sided_lipschitz_global": self.global_l[0] if self.global_l else None,
            "boundary": dict(self.problem.domain.boundary),
            "fields": self.fields,
        }

    def constants(self) -> list[ConstantInfo]:
        ns = self.problem.namespace
        gp_text = to_text(self.gp, ns)
        if self.global_l is not None:
            l_line = (
                f"g'(u) = {gp_text} is bounded above on all of R: l = {self.global_l[0]:.17g} "
                f"({self.global_l[1]}); no range of u is needed"
            )
        else:
            l_line = (
                f"g'(u) = {gp_text} is not bounded above on R (or not certifiably): "
                "l = sup of g' over [-M, M], M = max(sup_abs_u, sup_abs_model_u), by interval "
                "branch and bound"
            )
        return [
            ConstantInfo(
                name="growth rate of ||w||^2",
                symbol="a",
                expression="lambda + 2*l",
                latex=r"\lambda + 2\,\ell",
                derivation=(
                    "w = u_model - u solves w_t + a.grad w - sum_i k_i w_ii - (g(u_model) - g(u))"
                    " = R; multiply by w and integrate over the box.",
                    "Mean value theorem: g(u_model) - g(u) = g'(xi) w with xi between u and "
                    "u_model, so (g(u_model) - g(u)) w <= l w^2 with l >= sup g' over an "
                    "interval containing both (one-sided Lipschitz constant).",
                    l_line,
                    "a.grad(w) w = div(a w^2/2) (a constant); -k_i w w_ii = k_i w_i^2 - "
                    "(k_i w w_i)_i: boundary fluxes and dissipation, as in the linear family.",
                    "2 (R, w) <= lambda ||w||^2 + ||R||^2/lambda (Young, any lambda > 0).",
                    "Hence Y' <= (lambda + 2 l - F) Y + ||R||^2/lambda + B(t); the dissipation is "
                    "dropped (F = 0) unless the model satisfies the boundary condition exactly on "
                    "an axis (Friedrichs: F = sum_i 2 k_i (pi/L_i)^2).",
                ),
                reference=REFERENCE,
                rigor="proven" if self.global_l is not None else "assumed",
            ),
            ConstantInfo(
                name="one-sided Lipschitz constant of the reaction",
                symbol="l",
                expression=(
                    f"{self.global_l[0]:.17g}" if self.global_l else f"sup_[-M, M] ({gp_text})"
                ),
                latex=(
                    rf"\ell = {self.global_l[0]:.6g}"
                    if self.global_l
                    else rf"\ell = \sup_{{[-M,M]}} \left({to_latex(self.gp, ns)}\right)"
                ),
                derivation=(f"g(u) = {to_text(self.sym_g, ns)}", f"g'(u) = {gp_text}", l_line),
                reference=INTERVAL_REFERENCE,
                value=self.global_l[0] if self.global_l else None,
                rigor="proven" if self.global_l is not None else "assumed",
            ),
        ]

    # -- the inequality -------------------------------------------------------------------
    def _range(self, reg: Mapping[str, RegularityValue]) -> float | None:
        """max(sup_t sup_abs_u, sup_t sup_abs_model_u), certified; None if a key is missing."""
        if "sup_abs_u" not in reg or "sup_abs_model_u" not in reg:
            return None
        t_sym = self.problem.namespace.coordinate("t")
        span = self.problem.domain.time
        assert span is not None
        values = []
        for key in ("sup_abs_u", "sup_abs_model_u"):
            value = reg[key]
            if value.constant is not None:
                values.append(float(value.constant))
                continue
            assert value.expression is not None
            if value.poles:
                raise RegularityError(
                    "regularity_invalid",
                    f"{key} = {value.source} diverges inside the time interval; the range of u "
                    "is then unbounded",
                    f"regularity.{key}",
                )
            expr = value.expression  # in the internal time symbol, the same as t_sym
            try:
                values.append(_cmax(expr, {t_sym: span}))
            except IntervalError as exc:
                raise RegularityError(
                    "regularity_invalid",
                    f"{key} = {value.source}: its maximum over time cannot be certified by "
                    f"interval arithmetic ({exc}); give a number instead",
                    f"regularity.{key}",
                ) from exc
        return max(values)

    def _lipschitz(self, big_m: float | None) -> tuple[float, Rigor, str]:
        """``l`` from the global bound or over ``[-M, M]`` (``big_m``: ``_range``), the smaller."""
        options: list[tuple[float, Rigor, str]] = []
        if self.global_l is not None:
            options.append((self.global_l[0], "proven", self.global_l[1]))
        if big_m is not None:
            try:
                value = _cmax(self.gp, {self.u: (-big_m, big_m)})
                options.append(
                    (
                        value,
                        "assumed",
                        f"interval branch and bound of g' over [-{big_m:.6g}, {big_m:.6g}] "
                        "(M from sup_abs_u and sup_abs_model_u)",
                    )
                )
            except IntervalError as exc:
                if self.global_l is None:
                    raise RegularityError(
                        "regularity_invalid",
                        f"g' cannot be bounded on [-{big_m}, {big_m}]: {exc}",
                        "regularity.sup_abs_u",
                    ) from exc
        if not options:  # pragma: no cover - the requirements ask for the keys
            raise RegularityError(
                "regularity_missing", "the theorem needs sup_abs_u and sup_abs_model_u", None
            )
        return min(options, key=lambda o: o[0])

    def residual_scale(self) -> float:
        return 1.0 / self.time_coefficient

    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        grid = plan.time
        assert grid is not None
        n_t = grid.size
        y0 = total_integral(plan.components["initial"], np.square(res["initial"]))
        residual = slice_integrals(plan.components["interior"], np.square(res["interior"]), n_t)
        big_m = self._range(reg)
        lip, lip_rigor, lip_how = self._lipschitz(big_m)
        warnings: list[str] = []
        info: dict[str, SourceInfo] = {}
        forcing: dict[str, FloatArray] = {}
        domain = self.problem.domain
        fried = [a for a in exact_boundary_axes(self.problem, plan, res) if self.k[a] > 0]
        decay = sum(2 * self.k[a] * (math.pi / domain.length(a)) ** 2 for a in fried)
        if fried:
            warnings.append(friedrichs_warning(fried))
        if "boundary" in plan.components and domain.dirichlet_axes:
            forcing.update(
                dirichlet_terms(self.problem, plan, res, reg, self.a_expr, self.k_expr, {}, info)
            )
        for axis in domain.periodic_axes:
            forcing.update(
                periodic_terms(
                    self.problem, axis, inputs, self.a_expr[axis], self.k_expr[axis], info, warnings
                )
            )
        rate_value = 2 * lip - decay
        rate_rigor: Rigor = "assumed" if fried or lip_rigor == "assumed" else "proven"
        constants = self.constants()
        constants[0] = constants[0].with_value(rate_value, rate_rigor)
        constants[1] = ConstantInfo(
            name=constants[1].name,
            symbol=constants[1].symbol,
            expression=f"{lip:.17g}",
            latex=rf"\ell = {lip:.6g}",
            derivation=(*constants[1].derivation, f"used: {lip_how}"),
            reference=constants[1].reference,
            value=lip,
            rigor=lip_rigor,
        )
        if fried:
            constants.append(
                ConstantInfo(
                    name="Friedrichs decay",
                    symbol="F",
                    expression=f"{decay:.17g}",
                    latex=r"2\sum_i k_i (\pi/L_i)^2",
                    derivation=(
                        "w = 0 on the faces normal to "
                        + ", ".join(fried)
                        + " (boundary residual exactly zero, taken as a hard constraint).",
                        "On every line parallel to x_i: ||w||^2 <= (L_i/pi)^2 ||w_{x_i}||^2.",
                    ),
                    reference=FRIEDRICHS_REFERENCE,
                    value=decay,
                    rigor="assumed",
                )
            )
        flux = EnergyInequality(
            base_rate=Rate(constant=rate_value),
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
            inputs={"one_sided_lipschitz": lip, "friedrichs_decay": decay},
        )
        if LIFTING_COMPONENT in res:
            flux.label = "boundary flux estimate"
            lifted = self._lifted_inequality(inputs, y0, residual, (lip, lip_rigor, lip_how), big_m)
            if isinstance(lifted, str):
                flux.warnings.append(f"boundary lifting not used: {lifted}")
            else:
                lifted.failed_hypotheses = list(flux.failed_hypotheses)
                flux.alternatives.append(lifted)
        return flux

    # -- the boundary lifting (1-D Dirichlet) --------------------------------------------
    def _cross_constant(self, big_m: float | None) -> tuple[float, str] | str:
        """``G >= sup |g'|`` over an interval holding ``u`` and ``u_model`` (step S4; ``big_m``:
        ``_range``), or why it is not available."""
        if big_m is None:
            return (
                "the lifting's cross term needs sup |g'| between u and u_model: send "
                "sup_abs_u and sup_abs_model_u"
            )
        try:
            value = _cmax(sympy.Abs(self.gp), {self.u: (-big_m, big_m)})
        except IntervalError as exc:
            return f"sup |g'| over [-{big_m:.6g}, {big_m:.6g}] cannot be certified ({exc})"
        return value, (
            f"interval branch and bound of |g'| over [-{big_m:.6g}, {big_m:.6g}] (M from "
            "sup_abs_u and sup_abs_model_u)"
        )

    def _lifted_inequality(
        self,
        inputs: CertifyInputs,
        y0: float,
        residual: FloatArray,
        lipschitz: tuple[float, Rigor, str],
        big_m: float | None,
    ) -> EnergyInequality | str:
        """The estimate for ``v = w - B r`` (zero trace) plus ``||B r||``: steps S1-S8 of
        docs/theory/semilinear-parabolic.md ("Boundary lifting")."""
        plan = inputs.plan
        grid = plan.time
        assert grid is not None
        if not self.optional_components():
            return "the lifting is implemented for one space axis with Dirichlet ends"
        cross = self._cross_constant(big_m)
        if isinstance(cross, str):
            return cross
        big_g, g_how = cross
        traces = face_traces(plan, inputs.residuals)
        if isinstance(traces, str):
            return traces
        r = np.stack([traces.low, traces.high], axis=1)
        r_t = np.stack([traces.low_t, traces.high_t], axis=1)
        refused = rate_mismatch(grid, r, r_t)
        if refused is not None:
            return refused
        axis = self.problem.domain.dirichlet_axes[0]
        length = self.problem.domain.length(axis)
        lip, lip_rigor, lip_how = lipschitz
        k, a = self.k[axis], float(self.a_expr[axis])
        decay = 2 * k * (math.pi / length) ** 2
        # S2-S3: ||B r|| and ||L0 B r||, L0 = d_t + a d_x - k d_xx (d_xx B r = 0), exact
        b_norm = lifting_norm(length, traces.low, traces.high)
        jump = (traces.high - traces.low) / length
        lb_norm = lifting_norm(length, traces.low_t + a * jump, traces.high_t + a * jump)
        addition = lifting_addition(grid, length, r)
        # S5-S6: v(t0) = R_0 - B r(t0); forcing (||R|| + ||L0 B r|| + G ||B r||)^2 / lambda
        initial = (math.sqrt(max(y0, 0.0)) + float(addition.profile[0])) ** 2
        forcing_v = np.square(np.sqrt(np.maximum(residual, 0.0)) + lb_norm + big_g * b_norm)
        rate_value = 2 * lip - decay
        # G rests on the client's sup_abs_u and sup_abs_model_u (an assumption, as for l)
        cross_rigor: Rigor = "assumed"
        rate_rigor: Rigor = lip_rigor
        constants = self.constants()
        constants[0] = ConstantInfo(
            name=constants[0].name,
            symbol=constants[0].symbol,
            expression="lambda + 2*l - 2*k*(pi/L)^2",
            latex=r"\lambda + 2\,\ell - 2k(\pi/L)^2",
            derivation=(
                "v = w - B r vanishes at both ends; multiply the equation for v by v and "
                "integrate: the advection term a (v^2/2)_x and the diffusion's boundary term "
                "vanish, -k (v_xx, v) = k ||v_x||^2 >= k (pi/L)^2 ||v||^2 (Friedrichs).",
                "g(u_model) - g(u) = g'(xi) (v + B r): (g'(xi) v, v) <= l ||v||^2 and "
                "(g'(xi) B r, v) <= G ||B r|| ||v||.",
                "2 F ||v|| <= lambda ||v||^2 + F^2/lambda with F = ||R|| + ||L0 B r|| + G ||B r||.",
                f"l = {lip:.6g} ({lip_how}), k = {k:.6g}, L = {length:.6g}: "
                f"2 l - 2 k (pi/L)^2 = {rate_value:.6g}",
            ),
            reference=REFERENCE,
            value=rate_value,
            rigor=rate_rigor,
        )
        constants[1] = constants[1].with_value(lip, lip_rigor)
        constants.append(
            ConstantInfo(
                name="cross-term constant of the lifting",
                symbol="G",
                expression=f"{big_g:.17g}",
                latex=rf"G = {big_g:.6g} \ge \sup |g'|",
                derivation=(
                    f"g'(u) = {to_text(self.gp, self.problem.namespace)}",
                    "xi lies between u and u_model, so |g'(xi)| <= G for any G bounding |g'| "
                    "over an interval holding both.",
                    f"used: {g_how}",
                ),
                reference=INTERVAL_REFERENCE,
                value=big_g,
                rigor=cross_rigor,
            )
        )
        constants.append(
            lifting_constant(
                (
                    "w = u_model - u has the trace r (boundary residual) at x = a, b; v = w - B r "
                    "vanishes at both ends for every t.",
                    "v_t + a v_x - k v_xx - (g(u_model) - g(u)) = R - L0 B r, "
                    "L0 B r = d_t B r + a (r_b - r_a)/L (d_xx B r = 0); v(t0) = R_0 - B r(t0).",
                    f"||B r||^2 = L/3 (r_a^2 + r_a r_b + r_b^2) exactly (L = {length:.6g}); "
                    "||L0 B r|| the same closed form in r_t + a (r_b - r_a)/L, r_t = boundary_t.",
                    "Gronwall for ||v||^2, then ||w|| <= ||v|| + ||B r|| at each time and by "
                    "Minkowski in space-time.",
                ),
                b_norm,
                lb_norm,
                "L0",
            )
        )
        return EnergyInequality(
            base_rate=Rate(constant=rate_value),
            initial=initial,
            initial_info=LIFTED_INITIAL_INFO,
            residual=forcing_v,
            residual_info=SourceInfo(
                "interior residual of the lifted error",
                "(||R|| + ||L0 B r|| + G ||B r||)^2/lambda",
                "int_t0^t e^{A(s,t)} (||R(s)|| + ||L0 B r(s)|| + G ||B r(s)||)^2 / lambda ds",
                "heuristic",
                "quadrature of the interior residual; ||L0 B r|| and ||B r|| in closed form "
                "from the boundary residual and boundary_t at the time nodes",
            ),
            constants=constants,
            warnings=[
                "boundary lifting: w = v + B r with B r the linear interpolant of the boundary "
                "residual between the ends; v has zero trace, so the estimate for v has no "
                "boundary term and keeps the Friedrichs decay, the reaction's cross term "
                "g'(xi) B r enters through G ||B r||, and ||w|| <= ||v|| + ||B r||. It rests on "
                "boundary_t = d/dt (u_model - g) at the boundary points."
            ],
            rate_rigor=rate_rigor,
            inputs={
                "one_sided_lipschitz": lip,
                "friedrichs_decay": decay,
                "cross_constant": big_g,
            },
            norm_addition=addition,
            label="boundary lifting",
        )
