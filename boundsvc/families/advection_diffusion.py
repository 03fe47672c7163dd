"""Linear advection-diffusion-reaction with constant coefficients (heat equation included).

    u_t + sum_i a_i u_{x_i} - sum_i k_i u_{x_i x_i} + c u = s(x, t)   on  [t0, T] x box,

Dirichlet or periodic per axis. The derivation is in ``docs/theory/advection-diffusion.md``:
with ``w = u_model - u`` and ``R`` the interior residual, ``L w = R``; multiplying by ``w`` and
integrating by parts gives, for ``Y = ||w||^2``,

    Y' <= (lambda - 2 c) Y + ||R||^2 / lambda + B(t),
    B(t) = sum_faces [ -(a.n) int_F R_b^2 + 2 k_i int_F |R_b| (G_u,i + G_m,i) ]   (Dirichlet),

then Gronwall. References: the energy method for parabolic equations (Evans, "Partial
Differential Equations", 2nd ed. 2010, sec. 7.1.2); residual-based error bounds for PINNs
(Mishra & Molinaro, IMA J. Numer. Anal. 43 (2023) 1-43, the stability-plus-residual framework).
"""

from __future__ import annotations

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
    Requirement,
    SourceInfo,
)
from boundsvc.families._common import best_of, data_contradictions, gradient_keys
from boundsvc.families._linear import affine_split, field_names
from boundsvc.gronwall import Rate
from boundsvc.quadrature import face_slice_integrals, slice_integrals, total_integral

REFERENCE = (
    "Energy method: L. C. Evans, Partial Differential Equations, 2nd ed., AMS 2010, sec. 7.1.2; "
    "residual stability framework: S. Mishra, R. Molinaro, IMA J. Numer. Anal. 43 (2023) 1-43; "
    "Gronwall: T. H. Gronwall, Ann. Math. 20 (1919) 292-296."
)


class AdvectionDiffusionFamily(Family):
    """The linear advection-diffusion-reaction family (constant coefficients)."""

    id = "linear-advection-diffusion-reaction"
    title = "Linear advection-diffusion-reaction (constant coefficients)"
    equation_form = "u_t + a.grad(u) - sum_i k_i u_{x_i x_i} + c u = s(x, t),  k_i >= 0"
    hypotheses = (
        "The exact solution u is classical (C^1 in t, C^2 in x) on the closed domain.",
        "Dirichlet boundary: the boundary residual is u_model - u on the boundary, i.e. the "
        "boundary data equal the exact solution's trace on every boundary point.",
        "Regularity values bound |d u/d x_i| (and the model's) on the boundary faces at each time.",
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
        allowed = {(): "u", ("t",): "u_t"}
        gens = [ns.field(u, ("t",)), ns.field(u, ())]
        for a in axes:
            gens += [ns.field(u, (a,)), ns.field(u, (a, a))]
        expr = problem.numeric[0]
        others = [
            s
            for s in expr.free_symbols
            if s not in gens and (info := ns.describe(s)) is not None and info.kind == "field"
        ]
        if others:
            names = ", ".join(sorted(ns.describe(s).name for s in others))  # type: ignore[union-attr]
            return (
                f"the equation contains {names}; this family has u_t, first and pure second "
                "space derivatives only"
            )
        del allowed
        split = affine_split(expr, gens)
        if isinstance(split, str):
            return f"the equation is not linear in u and its derivatives ({split})"
        coordinates = {ns.coordinate(c) for c in ("t", *axes)}
        for g, coeff in split.coefficients.items():
            if coeff.free_symbols & coordinates:
                depends = sorted(ns.display_name(s) for s in coeff.free_symbols & coordinates)
                return (
                    f"the coefficient of {ns.display_name(g)} depends on {', '.join(depends)}; "
                    "variable coefficients are not covered by this family yet"
                )
            if coeff.free_symbols:
                return f"the coefficient of {ns.display_name(g)} is not a number"
        alpha = split.coefficients.get(gens[0], sympy.Integer(0))
        if alpha == 0:
            return "the equation has no time derivative u_t"
        if split.remainder.free_symbols - coordinates:
            return "the source term depends on something other than x and t"
        diffusion = {
            a: -split.coefficients.get(ns.field(u, (a, a)), sympy.Integer(0)) / alpha for a in axes
        }
        for a, k in diffusion.items():
            if k < 0:
                return (
                    f"the diffusion coefficient along {a} is {k} < 0 (backward diffusion): "
                    "the problem is ill-posed"
                )
        advection = {
            a: split.coefficients.get(ns.field(u, (a,)), sympy.Integer(0)) / alpha for a in axes
        }
        reaction = split.coefficients.get(gens[1], sympy.Integer(0)) / alpha
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
        self.a = {k: float(v) for k, v in advection.items()}
        self.k = {k: float(v) for k, v in diffusion.items()}
        self.c = float(reaction)
        self.sym_c = symbolic_reaction
        self.sym_k = symbolic_diffusion
        self.sym_a = symbolic_advection
        self.fields = fields

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
                if self.k[a] > 0:
                    names.append(f"periodic_{a}")
        return names

    def requirements(self) -> list[Requirement]:
        reqs = []
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
        keys: list[str] = []
        if self.problem.domain.periodic_axes:
            keys += ["sup_abs_u", "sup_abs_model_u"]
            for a in self.problem.domain.periodic_axes:
                if self.k[a] > 0:
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
            "boundary": dict(self.problem.domain.boundary),
            "fields": self.fields,
        }

    def constants(self) -> list[ConstantInfo]:
        ns = self.problem.namespace
        lam = sympy.Symbol("lambda", positive=True)
        rate = lam - 2 * self.sym_c
        rate_text = to_text(rate.xreplace({lam: sympy.Symbol("lambda")}), ns)
        rate_latex = to_latex(rate, ns)
        out = [
            ConstantInfo(
                name="growth rate of ||w||^2",
                symbol="a(t)",
                expression=rate_text,
                latex=rate_latex,
                derivation=(
                    "Multiply L w = R by w = u_model - u and integrate over the box.",
                    "a.grad(w) w = div(a w^2/2) (a constant): contributes -(a.n) w^2/2 "
                    "on the boundary.",
                    "-k_i w w_{x_i x_i} = k_i w_{x_i}^2 - (k_i w w_{x_i})_{x_i}: dissipation "
                    "plus a boundary flux k_i w w_{x_i} n_i.",
                    "2 (R, w) <= lambda ||w||^2 + ||R||^2 / lambda (Young, any lambda > 0).",
                    "Hence Y' <= (lambda - 2 c) Y + ||R||^2/lambda + B(t); the dissipation "
                    "is dropped.",
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
                        f"-(a.n) int_F R_b^2 + 2*({to_text(ka, ns)})*int_F |R_b| "
                        f"(G_u_{a}(t) + G_model_u_{a}(t))"
                    ),
                    latex=(
                        rf"-(a\cdot n)\int_F R_b^2 + 2\,({to_latex(ka, ns)})\int_F |R_b|\,"
                        rf"(G_{{u,{a}}}(t) + G_{{u^*,{a}}}(t))"
                    ),
                    derivation=(
                        "On a Dirichlet face w = R_b (the boundary residual) is known exactly.",
                        f"|w_{a}| <= |u_{a}| + |u_model_{a}| <= G_u + G_model on the face.",
                        "The advective flux -(a.n) w^2 is kept with its sign (outflow faces help).",
                    ),
                    reference=REFERENCE,
                    rigor="assumed" if self.k[a] > 0 else "proven",
                )
            )
        return out

    # -- the inequality --------------------------------------------------------------------
    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        grid = plan.time
        assert grid is not None
        n_t = grid.size
        times = grid.nodes
        interior = plan.components["interior"]
        initial_c = plan.components["initial"]
        r_int = res["interior"]
        y0 = total_integral(initial_c, np.square(res["initial"]))
        residual = slice_integrals(interior, np.square(r_int), n_t)
        forcing: dict[str, np.ndarray] = {}
        info: dict[str, SourceInfo] = {}
        warnings: list[str] = []
        domain = self.problem.domain
        if "boundary" in plan.components and domain.dirichlet_axes:
            bnd = plan.components["boundary"]
            rb = res["boundary"]
            sq = face_slice_integrals(bnd, np.square(rb), n_t)
            ab = face_slice_integrals(bnd, np.abs(rb), n_t)
            adv = np.zeros(n_t)
            dif = np.zeros(n_t)
            for f, face in enumerate(bnd.faces):
                a_n = self.a[face.axis] * face.outward_sign
                adv += -a_n * sq[f]
                if self.k[face.axis] > 0:
                    g_u = best_of(reg, gradient_keys(face.axis, False, self._dim), times)
                    g_m = best_of(reg, gradient_keys(face.axis, True, self._dim), times)
                    if g_u is None or g_m is None:  # pragma: no cover - checked by requirements
                        raise RegularityError(
                            "regularity_missing", "gradient bound missing", "regularity"
                        )
                    dif += 2 * self.k[face.axis] * ab[f] * (g_u[0] + g_m[0])
            if np.any(adv != 0):
                forcing["boundary_advective"] = adv
                info["boundary_advective"] = SourceInfo(
                    "boundary advective flux",
                    "-int (a.n) R_b^2",
                    "-(a.n) int_F R_b(t)^2",
                    "heuristic",
                    "signed: outflow faces reduce the bound",
                )
            if np.any(dif != 0):
                forcing["boundary_diffusive"] = dif
                info["boundary_diffusive"] = SourceInfo(
                    "boundary diffusive flux",
                    "2 k int |R_b| (G_u + G_m)",
                    "2 k_i int_F |R_b(t)| (G_u_i(t) + G_model_u_i(t))",
                    "heuristic",
                    "rests on the asserted gradient bounds (assumed) and the quadrature",
                )
        for axis in domain.periodic_axes:
            forcing.update(self._periodic_terms(axis, inputs, times, info, warnings))
        inequality = EnergyInequality(
            base_rate=Rate(constant=-2.0 * self.c),
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
            constants=[c.with_value(None) for c in self.constants()],
            warnings=warnings,
            failed_hypotheses=data_contradictions(self.problem, plan, res, reg),
            rate_rigor="proven",
        )
        inequality.constants[0] = inequality.constants[0].with_value(-2.0 * self.c)
        return inequality

    def _periodic_terms(
        self,
        axis: str,
        inputs: CertifyInputs,
        times: np.ndarray,
        info: dict[str, SourceInfo],
        warnings: list[str],
    ) -> dict[str, np.ndarray]:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        n_t = times.size
        comp = plan.components["periodic"]
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
        ab0 = face_slice_integrals(comp, np.abs(p0), n_t)[0] if comp.faces else np.zeros(n_t)
        ab1 = face_slice_integrals(comp, np.abs(p1), n_t)[0] if comp.faces else np.zeros(n_t)
        # -a_i (w_hi^2 - w_lo^2) = -a_i P0 (w_hi + w_lo);  |w_hi + w_lo| <= 2 (M_u + M_model)
        term = 2 * abs(self.a[axis]) * big_m * ab0
        if self.k[axis] > 0:
            g_u = best_of(reg, gradient_keys(axis, False, self._dim), times)
            g_m = best_of(reg, gradient_keys(axis, True, self._dim), times)
            if np.any(p0) and (g_u is None or g_m is None):
                raise RegularityError(
                    "regularity_missing",
                    f"the periodicity residuals along {axis} are not zero, so "
                    f"the bound needs sup_abs_u_{axis} and sup_abs_model_u_{axis}",
                    f"regularity.sup_abs_u_{axis}",
                )
            grad = (g_u[0] + g_m[0]) if g_u is not None and g_m is not None else np.zeros(n_t)
            # 2 k [w w_x]_lo^hi = 2 k (w_hi P1 + w_x,lo P0)
            term = term + 2 * self.k[axis] * (big_m * ab1 + grad * ab0)
        name = f"periodic_{axis}_mismatch"
        info[name] = SourceInfo(
            f"periodicity mismatch along {axis}",
            f"P_{axis}(t)",
            "2|a| M |P0| + 2 k (M |P1| + G |P0|)",
            "heuristic",
            "rests on sup bounds (assumed) and the quadrature",
        )
        return {name: term}
