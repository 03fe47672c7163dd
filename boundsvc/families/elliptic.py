"""Steady linear elliptic problems ``-div(k grad u) + c u = f`` on a box (Poisson included).

Two bounds, derived in ``docs/theory/elliptic.md``:

- an L2 bound by duality that admits a Dirichlet boundary residual ``r`` (it enters linearly):
  ``||w|| <= ||R|| / (k lambda_1 + c) + k K_b ||r||_{L2(boundary)}``, with ``lambda_1 =
  pi^2 sum_i L_i^-2`` the first Dirichlet eigenvalue of the box (so ``1/lambda_1`` is the square
  of the Friedrichs constant) and ``K_b`` a trace constant of the dual solution;
- a sup-norm bound by the maximum principle for users who can bound residual sups:
  ``sup |w| <= sup |r| + sup |R| L_min^2 / (8 k)``.

References: duality (Aubin-Nitsche type) argument, e.g. S. C. Brenner, L. R. Scott, The
Mathematical Theory of Finite Element Methods, 3rd ed. 2008, sec. 5.4; H^2 regularity on convex
domains ||D^2 z|| <= ||Lap z||: P. Grisvard, Elliptic Problems in Nonsmooth Domains, 1985,
Thm. 3.1.1.2; maximum principle: D. Gilbarg, N. S. Trudinger, Elliptic PDE of Second Order, 2nd
ed. 1983, Thm. 3.7 (comparison function); first eigenvalue of a box by separation of variables.
"""

from __future__ import annotations

import math

import numpy as np
import sympy

from boundsvc.families._analysis import AnalysedProblem
from boundsvc.families._base import (
    CertifyInputs,
    Classified,
    ConstantInfo,
    EnergyInequality,
    Family,
    FloatArray,
    Requirement,
    SteadyBound,
)
from boundsvc.families._dual import dual_norm_squared_1d
from boundsvc.families._linear import affine_split
from boundsvc.quadrature import Plan, total_integral

REFERENCE = (
    "Duality: S. C. Brenner, L. R. Scott, The Mathematical Theory of Finite Element Methods, "
    "3rd ed., Springer 2008, sec. 5.4; convex H^2 regularity: P. Grisvard, Elliptic Problems in "
    "Nonsmooth Domains, Pitman 1985, Thm. 3.1.1.2; maximum principle: D. Gilbarg, N. S. "
    "Trudinger, Elliptic Partial Differential Equations of Second Order, 2nd ed., Springer "
    "1983, Thm. 3.7."
)


class EllipticFamily(Family):
    """Steady ``-k Lap u + c u = f`` with Dirichlet data on a box in 1 to 3 dimensions."""

    id = "linear-elliptic"
    title = "Linear elliptic (Poisson / screened Poisson), steady, Dirichlet, box"
    equation_form = "-k (u_xx + u_yy + u_zz) + c u = f(x),  k > 0, c >= 0 constants"
    hypotheses = (
        "The exact solution u is in H^2 of the box (convex: true for f in L2 and data of the "
        "trace of an H^2 function).",
        "The boundary residual is u_model - u on every face (the data are the exact trace).",
        "Residual integrals are taken by the plan's quadrature (see each term's rigor).",
        "The sup-norm bound rests on asserted residual sups (keys sup_abs_residual_*).",
    )
    bounded_quantities = ("l2_space", "sup_space")
    reference = REFERENCE
    theory_document = "docs/theory/elliptic.md"
    typical_regularity = ()
    typical_optional = ("sup_abs_residual_interior", "sup_abs_residual_boundary")
    typical_components = ("interior", "boundary")

    def recognise(self, problem: AnalysedProblem) -> Classified | str:
        if not problem.is_steady:
            return "the problem is time-dependent; this family is steady (no time interval)"
        if len(problem.unknowns) != 1:
            return "this family has a single unknown"
        axes = problem.domain.space_axes
        if not axes:
            return "the problem has no space axes"
        if any(problem.domain.boundary[a] != "dirichlet" for a in axes):
            return "this family needs Dirichlet data on every face"
        ns = problem.namespace
        u = problem.unknowns[0]
        gens = (
            [ns.field(u, ())]
            + [ns.field(u, (a,)) for a in axes]
            + [ns.field(u, (a, a)) for a in axes]
        )
        expr = problem.numeric[0]
        for sym in expr.free_symbols:
            info = ns.describe(sym)
            if info is not None and info.kind == "field" and sym not in gens:
                return (
                    f"the equation contains {info.name}; this family has pure second "
                    "derivatives only (mixed derivatives are not covered)"
                )
        split = affine_split(expr, gens)
        if isinstance(split, str):
            return f"the equation is not linear in u ({split})"
        coords = {ns.coordinate(a) for a in axes}
        for g, coeff in split.coefficients.items():
            if coeff.free_symbols:
                return f"the coefficient of {ns.display_name(g)} is not a constant"
        second = [split.coefficients.get(ns.field(u, (a, a)), sympy.Integer(0)) for a in axes]
        if any(s == 0 for s in second):
            return "every axis needs its second derivative (u_xx, u_yy, ...)"
        if len(set(second)) != 1:
            return "the second-derivative coefficients differ between axes (anisotropic)"
        if any(split.coefficients.get(ns.field(u, (a,)), 0) != 0 for a in axes):
            return "first-derivative (advection) terms are not covered by this family"
        if split.remainder.free_symbols - coords:
            return "the source depends on something other than the coordinates"
        k = -float(second[0])
        sign = 1.0
        if k < 0:  # typed as u_xx + ... = f: multiply by -1
            k, sign = -k, -1.0
        c = sign * float(split.coefficients.get(ns.field(u, ()), sympy.Integer(0)))
        if c < 0:
            return f"the zeroth-order coefficient is {c} < 0 (not coercive): not covered"
        return ClassifiedElliptic(self, problem, k, c)


class ClassifiedElliptic(Classified):
    """A recognised steady elliptic problem."""

    def __init__(self, family: Family, problem: AnalysedProblem, k: float, c: float) -> None:
        self.family = family
        self.problem = problem
        self.k = k
        self.c = c
        lengths = [problem.domain.length(a) for a in problem.domain.space_axes]
        self.lengths = lengths
        self.lambda1 = math.pi**2 * sum(1.0 / length**2 for length in lengths)

    def components(self) -> list[str]:
        return ["interior", "boundary"]

    def requirements(self) -> list[Requirement]:
        return []

    def optional_keys(self) -> list[str]:
        return ["sup_abs_residual_interior", "sup_abs_residual_boundary"]

    def description(self) -> dict[str, object]:
        return {
            "form": self.family.equation_form,
            "k": self.k,
            "c": self.c,
            "box": {a: list(self.problem.domain.space[a]) for a in self.problem.domain.space_axes},
            "first_dirichlet_eigenvalue": self.lambda1,
        }

    def _trace_constant(self) -> tuple[float, str]:
        """``K`` with ``||d_n z||_{L2(boundary)} <= K ||w|| / k`` for the dual solution ``z``."""
        if len(self.lengths) == 1 and self.c == 0:
            length = self.lengths[0]
            return math.sqrt(2 * length / 3), "1-D Green's function: |z'(x_b)| <= sqrt(L/3) ||w||/k"
        g = 1.0 / math.sqrt(self.lambda1 + self.c / self.k)  # ||grad z|| <= g ||w|| / k
        h = 1.0 + self.c / (self.k * self.lambda1 + self.c)  # ||D^2 z|| <= h ||w|| / k
        total = sum(2.0 * (g * g / length + 2.0 * g * h) for length in self.lengths)
        return math.sqrt(total), (
            "1-D trace inequality v(0)^2 <= ||v||^2/L + 2||v|| ||v'|| "
            "on both faces of each axis, with ||grad z|| and ||D^2 z|| "
            "from the energy identity and convex H^2 regularity"
        )

    def _dual_interior(self, plan: Plan, values: FloatArray, r_int: float) -> float | None:
        """``||R||_{-1} G / k`` (step 7 of docs/theory/elliptic.md) on a 1-D Gauss-Legendre
        plan, with the L2 quadrature allowance carried over by ``||.||_{-1} <= (L/pi) ||.||``;
        None for other plans."""
        comp = plan.components["interior"]
        if len(self.lengths) != 1 or comp.rule != "gauss-legendre" or comp.time_index is not None:
            return None
        if len(comp.space_shape) != 1 or values.size != comp.size or comp.size < 2:
            return None
        panels = comp.space_panels[0] if comp.space_panels else 1
        if comp.size % panels or not np.all(np.diff(comp.points[:, 0]) > 0):
            return None
        length = self.lengths[0]
        dual = float(dual_norm_squared_1d(values[None, :], panels, length)[0])
        allowance = max(r_int - float(np.dot(comp.weights, np.square(values))), 0.0)
        dual += (length / math.pi) ** 2 * allowance
        if not math.isfinite(dual):
            return None
        g = 1.0 / math.sqrt(self.lambda1 + self.c / self.k)
        return math.sqrt(max(dual, 0.0)) * g / self.k

    def constants(self) -> list[ConstantInfo]:
        kb, how = self._trace_constant()
        return [
            ConstantInfo(
                name="coercivity",
                symbol="k lambda_1 + c",
                expression=f"k*pi^2*sum(1/L_i^2) + c = {self.k * self.lambda1 + self.c:.17g}",
                latex=r"k\pi^2\sum_i L_i^{-2} + c",
                derivation=(
                    "z solves -k Lap z + c z = w, z = 0 on the boundary;",
                    "k ||grad z||^2 + c ||z||^2 = (w, z) and ||grad z||^2 >= lambda_1 "
                    "||z||^2 (Friedrichs; lambda_1 = pi^2 sum 1/L_i^2, the first "
                    "Dirichlet eigenvalue of the box)",
                    "hence ||z|| <= ||w|| / (k lambda_1 + c)",
                ),
                reference=REFERENCE,
                value=self.k * self.lambda1 + self.c,
                rigor="proven",
            ),
            ConstantInfo(
                name="boundary trace constant",
                symbol="K_b",
                expression=f"{kb:.17g}",
                latex="K_b",
                derivation=(how, "Green's formula: ||w||^2 = (R, z) - k int r d_n z"),
                reference=REFERENCE,
                value=kb,
                rigor="proven",
            ),
        ]

    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:  # pragma: no cover
        raise NotImplementedError("a steady problem has no energy inequality in time")

    def steady_bound(self, inputs: CertifyInputs) -> SteadyBound:
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        r_int = total_integral(plan.components["interior"], np.square(res["interior"]))
        r_bnd = float(np.dot(plan.components["boundary"].weights, np.square(res["boundary"])))
        kb, _ = self._trace_constant()
        coercivity = self.k * self.lambda1 + self.c
        interior_term = math.sqrt(max(r_int, 0.0)) / coercivity
        interior = {
            "name": "interior residual",
            "symbol": "||R||/(k lambda_1 + c)",
            "value": interior_term,
            "formula": "||R||_{L2} / (k lambda_1 + c)",
            "rigor": "heuristic",
            "detail": "value = contribution to the L2 bound",
        }
        dual = self._dual_interior(plan, np.asarray(res["interior"], dtype=np.float64), r_int)
        if dual is not None and dual < interior_term:
            interior_term = dual
            interior = {
                **interior,
                "symbol": "||R||_{-1} G/k",
                "value": dual,
                "formula": "||R||_{H^-1} (lambda_1 + c/k)^(-1/2) / k (step 7 of elliptic.md)",
                "detail": "value = contribution to the L2 bound; the residual in the dual norm "
                "of H^1_0 (from its panel interpolant), smaller here than "
                f"||R||/(k lambda_1 + c) = {math.sqrt(max(r_int, 0.0)) / coercivity:.6g}",
            }
        boundary_term = kb * math.sqrt(max(r_bnd, 0.0))
        terms: list[dict[str, object]] = [
            interior,
            {
                "name": "boundary residual",
                "symbol": "K_b ||r||",
                "value": boundary_term,
                "formula": "K_b ||u_model - g||_{L2(boundary)} (enters linearly)",
                "rigor": "heuristic",
                "detail": "value = contribution to the L2 bound",
            },
        ]
        sup_bound: float | None = None
        if "sup_abs_residual_interior" in reg and "sup_abs_residual_boundary" in reg:
            f_sup = float(reg["sup_abs_residual_interior"].at(np.array([0.0]))[0])
            r_sup = float(reg["sup_abs_residual_boundary"].at(np.array([0.0]))[0])
            sup_bound = r_sup + f_sup * min(self.lengths) ** 2 / (8 * self.k)
            terms.append(
                {
                    "name": "maximum principle",
                    "symbol": "sup|r| + sup|R| L^2/(8k)",
                    "value": sup_bound,
                    "formula": "sup|r| + sup|R| L_min^2 / (8 k)",
                    "rigor": "assumed",
                    "detail": "bounds sup|u_model - u| "
                    "(bound.sup_space), from the asserted residual sups",
                }
            )
        return SteadyBound(
            l2_space=interior_term + boundary_term,
            terms=terms,
            constants=self.constants(),
            rigor="heuristic",
            sup_space=sup_bound,
        )
