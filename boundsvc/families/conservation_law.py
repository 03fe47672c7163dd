"""Scalar conservation law ``u_t + f(u)_x = nu u_xx`` in one space dimension (Burgers included).

Typed in quasi-linear form ``u_t + A(u) u_x = nu u_xx (+ s(x, t))`` with ``A = f'``. The bound
follows the relative-entropy method (Dafermos, "Hyperbolic Conservation Laws in Continuum
Physics", 4th ed. 2016, sec. 5.2; DiPerna, Indiana Univ. Math. J. 28 (1979) 137-188), written
out in ``docs/theory/conservation-law.md``: with ``w = u_model - u``,

    Q(a|b) = f(a) - f(b) - f'(b)(a - b),   q(a|b) = int_b^a (s - b) f'(s) ds,
    w (f(u_model) - f(u))_x = d_x q(u_model|u) + u_x Q(u_model|u),

so that for ``Y = ||w||^2``

    Y' <= (lambda + f''_+ S_-(t) + f''_- S_+(t)) Y + ||R||^2/lambda
          + 2 q(x_L) - 2 q(x_R) + 2 nu sum_b |R_b| (G_u + G_m),

``S_-`` bounding ``sup (u_x)^-`` (compressive gradients), ``S_+`` bounding ``sup (u_x)^+``,
``f''_+ = sup_I max(f'', 0)``, ``f''_- = sup_I max(-f'', 0)`` over an interval ``I`` holding
the values of the exact solution and the model (for a convex flux only ``S_-`` enters).
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping, Sequence

import numpy as np
import sympy

from boundsvc.errors import RegularityError
from boundsvc.expr import time_symbol, to_text
from boundsvc.families._analysis import AnalysedProblem
from boundsvc.families._base import (
    CertifyInputs,
    Classified,
    ConstantInfo,
    EnergyInequality,
    Family,
    Requirement,
    Rigor,
    SourceInfo,
)
from boundsvc.families._common import best_of, data_contradictions, evaluate_on
from boundsvc.families._linear import affine_split, field_names, foreign_field_names
from boundsvc.gronwall import Rate
from boundsvc.intervals import IntervalError, certified_max
from boundsvc.quadrature import face_slice_integrals, slice_integrals, total_integral
from boundsvc.regularity import RegularityValue

REFERENCE = (
    "Relative entropy method: C. M. Dafermos, Hyperbolic Conservation Laws in Continuum "
    "Physics, 4th ed., Springer 2016, sec. 5.2; R. J. DiPerna, Indiana Univ. Math. J. 28 (1979) "
    "137-188; residual framework: S. Mishra, R. Molinaro, IMA J. Numer. Anal. 43 (2023) 1-43."
)

_THETA, _THETA_W = np.polynomial.legendre.leggauss(64)
_THETA = 0.5 * (_THETA + 1.0)
_THETA_W = 0.5 * _THETA_W


class ConservationLawFamily(Family):
    """Scalar conservation laws in one space dimension, viscous or inviscid, Dirichlet data."""

    id = "scalar-conservation-law"
    title = "Scalar conservation law in one space dimension (viscous or inviscid)"
    equation_form = "u_t + f(u)_x = nu u_xx (+ s(x, t)), typed as u_t + f'(u) u_x = nu u_xx"
    hypotheses = (
        "The exact solution u is classical (Lipschitz in x, no shock) on [t0, T] x [x_L, x_R].",
        "The boundary residual is u_model - u at x_L and x_R (the boundary data are the exact "
        "solution's trace).",
        "S_-(t) >= sup_x max(-u_x, 0) and, for a non-convex flux, S_+(t) >= sup_x max(u_x, 0).",
        "For a flux with non-constant f'': |u| and |u_model| stay below the given sup bounds.",
        "Residual integrals are taken by the plan's quadrature (see each term's rigor).",
    )
    bounded_quantities = ("l2_space_time", "l2_final_time", "time_profile")
    reference = REFERENCE
    theory_document = "docs/theory/conservation-law.md"
    typical_regularity = ("sup_abs_u_x", "sup_abs_model_u_x")
    typical_optional = ("sup_neg_u_x", "sup_pos_u_x", "sup_abs_u", "sup_abs_model_u")
    typical_components = ("interior", "initial", "boundary")

    def recognise(self, problem: AnalysedProblem) -> Classified | str:
        if problem.is_steady:
            return "the problem is steady; a conservation law here is time-dependent"
        if len(problem.unknowns) != 1:
            return "this family has a single unknown"
        axes = problem.domain.space_axes
        if axes != ("x",):
            return "this family is one-dimensional (space axis x only)"
        ns = problem.namespace
        u = problem.unknowns[0]
        fu, ut, ux, uxx = (ns.field(u, d) for d in ((), ("t",), ("x",), ("x", "x")))
        expr = problem.numeric[0]
        others = foreign_field_names(expr, (fu, ut, ux, uxx), ns)
        if others:
            names = ", ".join(others)
            return f"the equation contains {names}; a conservation law has u_t, u_x, u_xx only"
        split = affine_split(expr, [ut, ux, uxx])
        if isinstance(split, str):
            return f"the equation is not of the form u_t + f'(u) u_x = nu u_xx ({split})"
        coords = {ns.coordinate("t"), ns.coordinate("x")}
        alpha = split.coefficients.get(ut, sympy.Integer(0))
        if alpha == 0 or alpha.free_symbols:
            return "the coefficient of u_t must be a non-zero number"
        visc = -split.coefficients.get(uxx, sympy.Integer(0)) / alpha
        if visc.free_symbols:
            return (
                "the u_xx coefficient depends on the solution or the coordinates: not a "
                "conservation law with constant viscosity"
            )
        if visc < 0:
            return f"the viscosity is {visc} < 0 (backward diffusion): ill-posed"
        speed = sympy.expand(split.coefficients.get(ux, sympy.Integer(0)) / alpha)
        if speed.free_symbols & coords:
            return "the u_x coefficient depends on x or t: not an autonomous flux f(u)"
        if not speed.has(fu):
            return "the u_x coefficient does not depend on u (a linear equation)"
        if split.remainder.has(fu):
            return (
                "the equation has a term in u outside f(u)_x (a reaction term): not a "
                "conservation law"
            )
        if problem.domain.boundary["x"] != "dirichlet":
            return "periodic conservation laws are not covered by this family yet"
        s_split = affine_split(problem.residuals[0], [ut, ux, uxx])
        assert not isinstance(s_split, str)
        s_alpha = s_split.coefficients.get(ut, sympy.Integer(1))
        return ClassifiedConservationLaw(
            family=self,
            problem=problem,
            speed=speed,
            viscosity=visc,
            symbolic_speed=sympy.simplify(s_split.coefficients.get(ux, sympy.Integer(0)) / s_alpha),
            symbolic_viscosity=sympy.simplify(
                -s_split.coefficients.get(uxx, sympy.Integer(0)) / s_alpha
            ),
            fields=field_names(expr, ns),
            time_coefficient=float(alpha),
            source_free=sympy.expand(split.remainder) == 0,
        )


class ClassifiedConservationLaw(Classified):
    """A recognised scalar conservation law."""

    def __init__(
        self,
        *,
        family: Family,
        problem: AnalysedProblem,
        speed: sympy.Expr,
        viscosity: sympy.Expr,
        symbolic_speed: sympy.Expr,
        symbolic_viscosity: sympy.Expr,
        fields: list[str],
        time_coefficient: float = 1.0,
        source_free: bool = False,
    ) -> None:
        self.family = family
        self.source_free = source_free
        self.problem = problem
        self.u = problem.namespace.field(problem.unknowns[0], ())
        self.speed = speed  # A(u) = f'(u)
        self.curvature = sympy.expand(sympy.diff(speed, self.u))  # f''(u)
        self.nu = float(viscosity)
        self.sym_speed = symbolic_speed
        self.sym_nu = symbolic_viscosity
        self.fields = fields
        self.time_coefficient = time_coefficient
        self.constant_curvature = not self.curvature.has(self.u)
        # safe: expressions built by our parser, in our internal field symbol only
        self._speed_fn = sympy.lambdify(self.u, speed, modules="numpy")

    @property
    def viscous(self) -> bool:
        return self.nu > 0

    def _curvature_signs(self) -> tuple[bool, bool]:
        """Whether f'' can be positive / negative (before the range is known)."""
        if self.constant_curvature:
            value = float(self.curvature)
            return value > 0, value < 0
        return True, True

    def _needs_range(self) -> bool:
        return not self.constant_curvature or self.problem.boundary_value is None

    @functools.cached_property
    def data_bound(self) -> float | None:
        """sup |u| of the exact solution by the maximum principle, from the problem's data.

        Without a source, a solution of ``u_t + f(u)_x = nu u_xx`` (nu >= 0; the entropy
        solution when nu = 0) takes its values between the extremes of its initial and
        boundary data (comparison principle: Kruzkov 1970 for nu = 0; the parabolic maximum
        principle, e.g. Evans 2010 sec. 7.1.4, for nu > 0). Both extremes are certified by
        interval branch and bound; None when the data are missing or cannot be bounded.
        """
        problem = self.problem
        if (
            not self.source_free
            or problem.initial_values is None
            or problem.boundary_value is None
            or problem.spec.time is None
        ):
            return None
        ns = problem.namespace
        x, t = ns.coordinate("x"), ns.coordinate("t")
        lo, hi = problem.spec.space["x"]
        t0, t_end = problem.spec.time
        try:
            bounds = [certified_max(sympy.Abs(problem.initial_values[0]), {x: (lo, hi)})]
            for face in (lo, hi):
                g = problem.boundary_value.xreplace({x: sympy.Float(face, 17)})
                bounds.append(certified_max(sympy.Abs(g), {t: (t0, t_end)}))
        except IntervalError:
            return None
        value = max(bounds)
        return value if math.isfinite(value) else None

    def components(self) -> list[str]:
        return ["interior", "initial", "boundary"]

    def requirements(self) -> list[Requirement]:
        pos, neg = self._curvature_signs()
        reqs = []
        if pos:
            reqs.append(
                Requirement(
                    ("sup_abs_u_x", "sup_neg_u_x"),
                    "growth rate (compressive gradients)",
                    "sup over x of max(-u_x, 0) of the exact solution, per time",
                )
            )
        if neg:
            reqs.append(
                Requirement(
                    ("sup_abs_u_x", "sup_pos_u_x"),
                    "growth rate (expansive gradients, non-convex flux)",
                    "sup over x of max(u_x, 0) of the exact solution, per time",
                )
            )
        if self.viscous:
            reqs.append(
                Requirement(
                    ("sup_abs_u_x",),
                    "viscous boundary flux",
                    "sup over the boundary of |u_x| (exact solution)",
                )
            )
            reqs.append(
                Requirement(
                    ("sup_abs_model_u_x",),
                    "viscous boundary flux",
                    "sup over the boundary of |u_x| of the model",
                )
            )
        if self._needs_range():
            if self.data_bound is None:  # else derived from the data (maximum principle)
                reqs.append(
                    Requirement(
                        ("sup_abs_u",),
                        "range of u for bounds on f' and f''",
                        "sup |u| of the exact solution",
                    )
                )
            reqs.append(
                Requirement(
                    ("sup_abs_model_u",), "range of the model for f' and f''", "sup |u_model|"
                )
            )
        return reqs

    def optional_keys(self) -> list[str]:
        return [
            "sup_neg_u_x",
            "sup_pos_u_x",
            "sup_abs_u_x",
            "sup_abs_u",
            "sup_abs_model_u",
            "sup_neg_model_u_x",
            "sup_pos_model_u_x",
        ]

    def description(self) -> dict[str, object]:
        ns = self.problem.namespace
        flux: str
        if self.sym_speed.is_polynomial(self.u):
            flux = to_text(sympy.integrate(self.sym_speed, (self.u, 0, self.u)), ns)
        else:
            flux = f"int_0^u ({to_text(self.sym_speed, ns)}) du"
        return {
            "form": self.family.equation_form,
            "wave_speed": to_text(self.sym_speed, ns),
            "flux": flux,
            "flux_second_derivative": to_text(self.curvature, ns),
            "viscosity": to_text(self.sym_nu, ns),
            "convex": self.constant_curvature and float(self.curvature) >= 0,
            "fields": self.fields,
        }

    def constants(self) -> list[ConstantInfo]:
        ns = self.problem.namespace
        lam, fp, fm = sympy.symbols("lambda f2_plus f2_minus")
        t = sympy.Symbol("t")
        s_minus, s_plus = sympy.Function("S_minus")(t), sympy.Function("S_plus")(t)
        pos, neg = self._curvature_signs()
        rate = lam + (fp * s_minus if pos else 0) + (fm * s_plus if neg else 0)
        out = [
            ConstantInfo(
                name="growth rate of ||w||^2",
                symbol="a(t)",
                expression=str(rate),
                latex=sympy.latex(
                    rate,
                    symbol_names={lam: r"\lambda", fp: r"f''_{+}", fm: r"f''_{-}"},
                )
                .replace(r"S_{minus}{\left(t \right)}", r"S_{-}(t)")
                .replace(r"S_{plus}{\left(t \right)}", r"S_{+}(t)"),
                derivation=(
                    "w_t + (f(u_model) - f(u))_x = nu w_xx + R; multiply by w, integrate over x.",
                    "w (f(u_model) - f(u))_x = d_x q(u_model|u) + u_x Q(u_model|u) "
                    "(relative entropy identity; Q(a|b) = f(a) - f(b) - f'(b)(a-b), "
                    "q(a|b) = int_b^a (s-b) f'(s) ds).",
                    "Q(a|b) = f''(xi)/2 (a-b)^2 with xi between a and b, so "
                    "-u_x Q <= (f2_plus S_minus + f2_minus S_plus) w^2/2.",
                    "nu w w_xx = nu (w w_x)_x - nu w_x^2; the dissipation is dropped.",
                    "2 (R, w) <= lambda ||w||^2 + ||R||^2/lambda (Young, any lambda > 0).",
                    f"f''(u) = {to_text(self.curvature, ns)}; f2_plus = sup_I max(f'', 0), "
                    "f2_minus = sup_I max(-f'', 0) (interval arithmetic when f'' is not constant).",
                ),
                reference=REFERENCE,
                rigor="assumed",
            )
        ]
        out.append(
            ConstantInfo(
                name="boundary terms",
                symbol="B(t)",
                expression=(
                    "2 q(u_model|g)(x_L) - 2 q(u_model|g)(x_R) + 2 nu sum_b |R_b| (G_u + G_model)"
                ),
                latex=r"2q(u^*|g)(x_L) - 2q(u^*|g)(x_R) + 2\nu\sum_b |R_b|\,(G_u + G_{u^*})",
                derivation=(
                    "On the boundary w = R_b and u = g are known, so q(u_model|u) = "
                    "q(g + R_b|g) is computed with its sign (64-point Gauss in the flux "
                    "integral: exact for polynomial fluxes).",
                    "Without boundary data: |q(a|b)| <= sup_I |f'| (a-b)^2 / 2.",
                    "nu w w_x at x_b: |w_x| <= |u_x| + |u_model_x| <= G_u + G_model.",
                ),
                reference=REFERENCE,
                rigor="assumed" if self.viscous else "proven",
            )
        )
        del ns
        return out

    # -- the inequality -------------------------------------------------------------------
    def _range(self, reg: Mapping[str, RegularityValue], t_end: float) -> float:
        values = []
        for key in ("sup_abs_u", "sup_abs_model_u"):
            if key == "sup_abs_u" and key not in reg:
                assert self.data_bound is not None  # requirements() asked for the key otherwise
                values.append(self.data_bound)
                continue
            value = reg[key]
            if value.constant is not None:
                values.append(float(value.constant))
            else:
                t = np.linspace(*self._time(), 2049)
                sample = value.at(t)
                if not np.all(np.isfinite(sample)):
                    return math.inf
                values.append(_certified_time_sup(value, self._time()))
        del t_end
        return max(values)

    def _time(self) -> tuple[float, float]:
        assert self.problem.spec.time is not None
        return self.problem.spec.time

    def residual_scale(self) -> float:
        return 1.0 / self.time_coefficient

    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        grid = plan.time
        assert grid is not None
        n_t, times = grid.size, grid.nodes
        warnings: list[str] = []
        y0 = total_integral(plan.components["initial"], np.square(res["initial"]))
        residual = slice_integrals(plan.components["interior"], np.square(res["interior"]), n_t)
        pos, neg = self._curvature_signs()
        big_m = self._range(reg, grid.t_end) if self._needs_range() else math.nan
        if self.constant_curvature:
            c = float(self.curvature)
            f2p, f2m = max(c, 0.0), max(-c, 0.0)
            curvature_rigor: Rigor = "proven"
        else:
            if not math.isfinite(big_m):
                raise RegularityError(
                    "regularity_invalid",
                    "sup_abs_u or sup_abs_model_u is unbounded on the interval; "
                    "the flux curvature cannot be bounded",
                    "regularity.sup_abs_u",
                )
            box = {self.u: (-big_m, big_m)}
            try:
                f2p = max(certified_max(self.curvature, box), 0.0)
                f2m = max(certified_max(-self.curvature, box), 0.0)
            except IntervalError as exc:
                raise RegularityError(
                    "regularity_invalid",
                    f"f'' cannot be bounded on [-{big_m}, {big_m}]: {exc}",
                    "regularity.sup_abs_u",
                ) from exc
            curvature_rigor = "proven"
            pos, neg = f2p > 0, f2m > 0
        rate_parts: list[tuple[float, list[RegularityValue]]] = []
        poles: list[float] = []
        if pos and f2p > 0:
            sm = [reg[k] for k in ("sup_neg_u_x", "sup_abs_u_x") if k in reg]
            rate_parts.append((f2p, sm))
            poles += _common_poles(sm)
        if neg and f2m > 0:
            sp = [reg[k] for k in ("sup_pos_u_x", "sup_abs_u_x") if k in reg]
            rate_parts.append((f2m, sp))
            poles += _common_poles(sp)
        rate = _rate_from(rate_parts, tuple(sorted(set(poles))))
        # model-anchored variant: the relative-entropy identity with the model as the
        # reference solution, w (f(u_model) - f(u))_x = d_x q(u|u_model) + u_model_x Q(u|u_model),
        # so the rate uses the model's one-sided gradient bounds instead of the exact solution's
        model_parts: list[tuple[float, list[RegularityValue]]] = []
        model_poles: list[float] = []
        if any(k in reg for k in _MODEL_GRADIENT_KEYS):
            if pos and f2p > 0:
                mm = [reg[k] for k in ("sup_neg_model_u_x",) if k in reg]
                model_parts.append((f2p, mm))
                model_poles += _common_poles(mm)
            if neg and f2m > 0:
                mp = [reg[k] for k in ("sup_pos_model_u_x",) if k in reg]
                model_parts.append((f2m, mp))
                model_poles += _common_poles(mp)
        forcing: dict[str, np.ndarray] = {}
        info: dict[str, SourceInfo] = {}
        bnd = plan.components["boundary"]
        rb = res["boundary"]
        model_flux: np.ndarray | None = None
        if self.problem.boundary_value is not None:
            g = evaluate_on(self.problem.boundary_value, self.problem, bnd.axes, bnd.points)
            q = self._relative_flux(g + rb, g)
            signs = np.where(bnd.face_index == 0, 2.0, -2.0)  # face 0: x_L (low), face 1: x_R
            flux = face_slice_integrals(bnd, signs * q, n_t).sum(axis=0)
            if model_parts:
                # with the model as reference the boundary flux is q(u|u_model) = q(g|g + R_b)
                q_model = self._relative_flux(g, g + rb)
                model_flux = face_slice_integrals(bnd, signs * q_model, n_t).sum(axis=0)
            detail = "q(u_model|g) evaluated from the boundary data and residuals, signed"
        else:
            box = {self.u: (-big_m, big_m)}
            try:
                amax = certified_max(sympy.Abs(self.speed), box)
            except IntervalError as exc:
                raise RegularityError(
                    "regularity_invalid", f"f' cannot be bounded: {exc}", "regularity.sup_abs_u"
                ) from exc
            flux = face_slice_integrals(bnd, amax * np.square(rb), n_t).sum(axis=0)
            detail = "|q(a|b)| <= sup|f'| (a-b)^2/2 (no boundary data given)"
            warnings.append(
                "no boundary_value given: the boundary flux is bounded by "
                "sup|f'| R_b^2/2 instead of being computed exactly"
            )
        forcing["boundary_flux"] = flux
        info["boundary_flux"] = SourceInfo(
            "boundary relative-entropy flux",
            "2 q(x_L) - 2 q(x_R)",
            "2 q(u_model|u)(x_L, t) - 2 q(u_model|u)(x_R, t)",
            "heuristic",
            detail,
        )
        if self.viscous:
            g_u = best_of(reg, ("sup_abs_u_x",), times)
            g_m = best_of(reg, ("sup_abs_model_u_x",), times)
            assert g_u is not None and g_m is not None
            ab = face_slice_integrals(bnd, np.abs(rb), n_t).sum(axis=0)
            forcing["boundary_viscous"] = 2 * self.nu * ab * (g_u[0] + g_m[0])
            info["boundary_viscous"] = SourceInfo(
                "viscous boundary flux",
                "2 nu sum |R_b| (G_u + G_m)",
                "2 nu sum_b |R_b(t)| (G_u(t) + G_model(t))",
                "heuristic",
                "rests on the asserted gradient bounds (assumed) and the quadrature",
            )
        constants = self.constants()
        constants[0] = constants[0].with_value(None, "assumed" if rate_parts else curvature_rigor)
        constants.append(
            ConstantInfo(
                name="flux curvature bounds",
                symbol="f2_plus, f2_minus",
                expression=f"f2_plus = {f2p:.17g}, f2_minus = {f2m:.17g}",
                latex=rf"f''_+ = {f2p:.6g},\; f''_- = {f2m:.6g}",
                derivation=(
                    (
                        "f'' is constant"
                        if self.constant_curvature
                        else f"interval branch and bound of f'' over [-{big_m:.6g}, {big_m:.6g}]"
                    ),
                ),
                reference="R. E. Moore, R. B. Kearfott, M. J. Cloud, Introduction to Interval "
                "Analysis, SIAM 2009",
                value=f2p,
                rigor="proven",
            )
        )
        if self._needs_range() and "sup_abs_u" not in reg and self.data_bound is not None:
            constants.append(
                ConstantInfo(
                    name="sup |u| by the maximum principle",
                    symbol="M_u",
                    expression="max(sup_x |u0(x)|, sup_t |g(x_L, t)|, sup_t |g(x_R, t)|)",
                    latex=r"M_u = \max(\sup|u_0|, \sup|g(x_L,\cdot)|, \sup|g(x_R,\cdot)|)",
                    derivation=(
                        "No source term: the solution takes its values between the extremes "
                        "of its initial and boundary data (comparison principle; Kruzkov 1970 "
                        "for nu = 0, the parabolic maximum principle for nu > 0).",
                        "Each sup is certified by interval branch and bound of the data "
                        "expressions over the space interval and over [t0, T].",
                        "Used in place of sup_abs_u, which the request did not give.",
                    ),
                    reference="S. N. Kruzkov, Math. USSR Sb. 10 (1970) 217-243; L. C. Evans, "
                    "Partial Differential Equations, 2nd ed. 2010, sec. 7.1.4",
                    value=self.data_bound,
                    rigor="proven",
                )
            )
        main = EnergyInequality(
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
            nonnegative=("boundary_viscous",),
            constants=constants,
            warnings=warnings,
            failed_hypotheses=data_contradictions(self.problem, plan, res, reg),
            rate_rigor="assumed" if rate_parts else "proven",
            inputs={"f2_plus": f2p, "f2_minus": f2m},
        )
        if model_parts and all(vals for _, vals in model_parts):
            anchored_forcing = dict(forcing)
            anchored_info = dict(info)
            if model_flux is not None:
                anchored_forcing["boundary_flux"] = model_flux
                anchored_info["boundary_flux"] = SourceInfo(
                    "boundary relative-entropy flux",
                    "2 q(x_L) - 2 q(x_R)",
                    "2 q(u|u_model)(x_L, t) - 2 q(u|u_model)(x_R, t)",
                    "heuristic",
                    "q(g|u_model) evaluated from the boundary data and residuals, signed "
                    "(the model is the reference solution)",
                )
            anchored_constants = list(constants)
            anchored_constants[0] = ConstantInfo(
                name="growth rate of ||w||^2 (model-anchored)",
                symbol="a(t)",
                expression=constants[0]
                .expression.replace("S_minus", "S_model_minus")
                .replace("S_plus", "S_model_plus"),
                latex=constants[0]
                .latex.replace("S_{-}", "S^{*}_{-}")
                .replace("S_{+}", "S^{*}_{+}"),
                derivation=(
                    "The relative-entropy identity with the model as the reference solution: "
                    "w (f(u_model) - f(u))_x = d_x q(u|u_model) + u_model_x Q(u|u_model).",
                    "-u_model_x Q(u|u_model) <= (f2_plus S_model_minus + f2_minus "
                    "S_model_plus) w^2/2, with S_model_minus >= sup_x max(-d_x u_model, 0) "
                    "(sup_neg_model_u_x) and S_model_plus >= sup_x max(d_x u_model, 0) "
                    "(sup_pos_model_u_x).",
                    "Every other step as in the exact-solution-anchored rate.",
                ),
                reference=REFERENCE,
                value=None,
                rigor="assumed",
            )
            anchored = EnergyInequality(
                base_rate=_rate_from(model_parts, tuple(sorted(set(model_poles)))),
                initial=y0,
                initial_info=main.initial_info,
                residual=residual,
                residual_info=main.residual_info,
                forcing=anchored_forcing,
                forcing_info=anchored_info,
                nonnegative=("boundary_viscous",),
                constants=anchored_constants,
                warnings=[
                    *warnings,
                    "model-anchored: the growth rate uses the model's one-sided gradient "
                    "bounds (sup_neg_model_u_x / sup_pos_model_u_x), which the client asserts "
                    "for its own model (rigor: assumed)",
                ],
                failed_hypotheses=main.failed_hypotheses,
                rate_rigor="assumed",
                inputs=main.inputs,
                label="model-anchored rate (the model's gradient)",
            )
            main.alternatives.append(anchored)
        return main

    def _relative_flux(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """q(a|b) = (a-b)^2 int_0^1 theta f'(b + theta (a-b)) dtheta (64-point Gauss)."""
        d = a - b
        s = b[:, None] + _THETA[None, :] * d[:, None]
        with np.errstate(all="ignore"):
            speed = np.broadcast_to(np.asarray(self._speed_fn(s), dtype=np.float64), s.shape)
        return np.square(d) * (speed * (_THETA * _THETA_W)[None, :]).sum(axis=1)


#: Regularity keys of the model's own gradient that enable the model-anchored rate.
#: (``sup_abs_model_u_x`` is not used here: the viscous boundary term asks for it as a bound
#: on the boundary only, which is not a bound over the whole interval.)
_MODEL_GRADIENT_KEYS = ("sup_neg_model_u_x", "sup_pos_model_u_x")


def _certified_time_sup(value: RegularityValue, interval: tuple[float, float]) -> float:
    """A certified upper bound of a time-varying regularity value over ``interval``."""
    assert value.expression is not None
    try:
        return certified_max(value.expression, {time_symbol(): interval})
    except IntervalError as exc:
        raise RegularityError(
            "regularity_invalid",
            f"{value.key} = {value.source}: its maximum over time cannot be certified by "
            f"interval arithmetic ({exc}); give a number instead",
            f"regularity.{value.key}",
        ) from exc


def _common_poles(values: Sequence[RegularityValue]) -> list[float]:
    """Poles of a pointwise minimum of bounds: the times where every one of them diverges."""
    sets = [set(v.poles) for v in values]
    return sorted(set.intersection(*sets)) if sets else []


def _rate_from(parts: list[tuple[float, list[RegularityValue]]], poles: tuple[float, ...]) -> Rate:
    """``sum_parts c * min(values)(t)`` as a Gronwall rate."""
    if not parts:
        return Rate(constant=0.0)
    if all(all(v.constant is not None for v in vals) for _, vals in parts):
        total = sum(c * min(float(v.constant or 0.0) for v in vals) for c, vals in parts)
        return Rate(constant=total)

    def rate(t: np.ndarray) -> np.ndarray:
        out = np.zeros_like(t)
        for c, vals in parts:
            out = out + c * np.min(np.stack([v.at(t).reshape(t.shape) for v in vals]), axis=0)
        return out

    return Rate(function=rate, poles=poles)
