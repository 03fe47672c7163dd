"""Systems of ordinary differential equations ``y' = F(t, y)`` (one or more unknowns).

The derivation is in ``docs/theory/ode-system.md``. With ``e = y_model - y`` and the interior
residual ``r = y_model' - F(t, y_model)``,

    e' = F(t, y_model) - F(t, y) + r = Jbar(t) e + r,   Jbar = int_0^1 J(t, y + theta e) dtheta,

so ``d|e|/dt <= mu(t) |e| + |r(t)|`` (Euclidean norm) for any ``mu(t)`` bounding the logarithmic
norm ``mu_2(J) = lambda_max((J + J^T)/2)`` (or the operator norm ``||J||_2``) of the Jacobian
``J = dF/dy`` over the segment between ``y(t)`` and ``y_model(t)``. The segment lies in the box
given by the regularity bounds, where interval arithmetic bounds the rate (per time slab when
the box or ``J`` depends on time). The linear (non-squared) Gronwall form then gives

    |e(t)| <= e^{A(t0, t)} |e(t0)| + int_t0^t e^{A(s, t)} |r(s)| ds,   A(s, t) = int_s^t mu,

the a-posteriori bound of Hillebrecht & Unger (IJCNN 2022) with the Lipschitz constant replaced
by the one-sided (logarithmic-norm) rate of Dahlquist (1958) and Soderlind (2006), whichever is
smaller. No Young weight is needed.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import sympy
from numpy.typing import NDArray

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
    Rigor,
    SourceInfo,
)
from boundsvc.families._common import ABS_SLACK, REL_SLACK
from boundsvc.families._linear import affine_split
from boundsvc.gronwall import Rate
from boundsvc.intervals import IntervalError, certified_max, enclose
from boundsvc.regularity import RegularityValue

FloatArray = NDArray[np.float64]

REFERENCE = (
    "A posteriori bound for PINN ODE surrogates: B. Hillebrecht, B. Unger, Certified machine "
    "learning: A posteriori error estimation for physics-informed neural networks, IJCNN 2022, "
    "doi:10.1109/IJCNN55064.2022.9892569; logarithmic norm: G. Dahlquist, Stability and error "
    "bounds in the numerical integration of ordinary differential equations, thesis, Stockholm "
    "1958 (Trans. Roy. Inst. Technol. Stockholm 130, 1959), and G. Soderlind, The logarithmic "
    "norm. History and modern theory, BIT Numer. Math. 46 (2006) 631-652; Gronwall: T. H. "
    "Gronwall, Ann. Math. 20 (1919) 292-296; interval arithmetic: R. E. Moore, R. B. Kearfott, "
    "M. J. Cloud, Introduction to Interval Analysis, SIAM 2009."
)

#: uniform time slabs of the piecewise-constant rate (when the box or J depends on time)
SLABS = 64
#: extra slabs halving towards each pole of a regularity bound (the bound ends there)
POLE_REFINEMENT = 24
#: interval branch and bound budget per expression and box
_MAX_BOXES = 200
_REL_TOL = 1e-3
#: smoothing of |r| before interpolation, in units of the largest node-to-node change of r
SMOOTHING = 2.0
_EPS = float(np.finfo(np.float64).eps)


def _sup(expr: sympy.Expr, box: Mapping[sympy.Symbol, tuple[float, float]]) -> float:
    """A certified upper bound of ``sup expr`` over ``box``.

    First the natural interval extension on the whole box, accepted when a vertex value (a
    lower bound of the sup) is within the branch-and-bound tolerance of it (the common case:
    expressions monotone in each variable, such as ``2*y`` or ``tan(t)``); otherwise interval
    branch and bound. Both return upper ends of interval enclosures, hence valid bounds.
    """
    if len(box) <= 4:
        hi = enclose(expr, box)[1]
        lower = -math.inf
        for corner in itertools.product(*box.values()):
            point = {s: (c, c) for s, c in zip(box, corner, strict=True)}
            lower = max(lower, enclose(expr, point)[0])
        if math.isfinite(hi) and hi - lower <= _REL_TOL * max(1.0, abs(lower)):
            return hi
    return certified_max(expr, box, max_boxes=_MAX_BOXES, rel_tol=_REL_TOL)


def _up(value: float, ulps: int = 2) -> float:
    """``value`` rounded up by a few units in the last place (after a float operation)."""
    out = value
    for _ in range(ulps):
        out = float(np.nextafter(out, math.inf))
    return out


def _sqrt_up(value: float) -> float:
    return _up(math.sqrt(max(value, 0.0))) if math.isfinite(value) else math.inf


# ------------------------------------------------------------------------------ the rate
@dataclass(frozen=True)
class PiecewiseConstantRate(Rate):
    """A rate constant on each slab ``[edges[k], edges[k+1]]``, integrated exactly.

    ``edges`` end at the last time where the rate is finite (the rate is ``+inf`` after it,
    and that time is listed in ``poles``, so the bound ends there).
    """

    edges: tuple[float, ...] = ()
    values: tuple[float, ...] = ()

    @staticmethod
    def build(edges: Sequence[float], values: Sequence[float], pole: float | None) -> Rate:
        e = np.asarray(edges, dtype=np.float64)
        v = np.asarray(values, dtype=np.float64)

        def evaluate(t: FloatArray) -> FloatArray:
            idx = np.clip(np.searchsorted(e, t, side="right") - 1, 0, v.size - 1)
            out = v[idx]
            return np.where((t >= e[0]) & (t <= e[-1]), out, math.inf)

        return PiecewiseConstantRate(
            function=evaluate,
            poles=() if pole is None else (pole,),
            edges=tuple(float(x) for x in e),
            values=tuple(float(x) for x in v),
        )

    def __call__(self, t: FloatArray) -> FloatArray:
        assert self.function is not None
        return np.asarray(self.function(np.asarray(t, dtype=np.float64)), dtype=np.float64)

    def shifted(self, delta: float) -> Rate:
        return PiecewiseConstantRate.build(
            self.edges, [v + delta for v in self.values], self.poles[0] if self.poles else None
        )

    def scaled(self, factor: float) -> Rate:
        """The rate ``factor * a(t)`` (``factor > 0``)."""
        return PiecewiseConstantRate.build(
            self.edges, [v * factor for v in self.values], self.poles[0] if self.poles else None
        )

    def integral(self, lower: FloatArray, upper: FloatArray) -> FloatArray:
        """``int_lower^upper a`` exactly (piecewise-linear antiderivative), rounded up."""
        e = np.asarray(self.edges)
        v = np.asarray(self.values)
        widths = np.diff(e)
        cum = np.concatenate([[0.0], np.cumsum(v * widths)])
        mag = np.concatenate([[0.0], np.cumsum(np.abs(v) * widths)])
        lo = np.asarray(lower, dtype=np.float64)
        hi = np.asarray(upper, dtype=np.float64)
        outside = (lo < e[0]) | (hi > e[-1]) | (lo > e[-1]) | (hi < e[0])
        a = np.interp(hi, e, cum) - np.interp(lo, e, cum)
        margin = 8 * (v.size + 2) * _EPS * (np.interp(hi, e, mag) + np.interp(lo, e, mag))
        return np.asarray(np.where(outside, math.inf, a + margin + 1e-300), dtype=np.float64)


@dataclass(frozen=True)
class _Candidate:
    """One valid bound of ``e.J e / |e|^2``: the sups of ``exprs`` combined by ``combine``."""

    name: str
    kind: str  # "logarithmic-norm" or "lipschitz"
    exprs: tuple[sympy.Expr, ...]
    combine: Callable[[list[float]], float]


@dataclass(frozen=True)
class RateBound:
    """The certified rate: a Gronwall rate and how it was obtained."""

    rate: Rate
    max_value: float
    method: str
    rigor: Rigor
    slabs: int
    warnings: tuple[str, ...]
    pole: float | None


# ---------------------------------------------------------------------------- the family
class OdeSystemFamily(Family):
    """Initial value problems for ``y' = F(t, y)``; Euclidean error bound (norm Gronwall)."""

    id = "ode-system"
    title = "System of ordinary differential equations y' = F(t, y) (logarithmic-norm Gronwall)"
    equation_form = "M y' = G(t, y) with a constant invertible M (typically y_i' = F_i(t, y))"
    hypotheses = (
        "The exact solution y of the initial value problem exists and is C^1 on [t0, T].",
        "F is continuously differentiable in y on the box of the regularity bounds (its "
        "Jacobian is bounded there by interval arithmetic).",
        "For F nonlinear in y: |y_i(t)| <= sup_abs_<y_i>(t) and |y_model_i(t)| <= "
        "sup_abs_model_<y_i>(t) at every time (and the one-sided sup_pos_/sup_neg_ bounds "
        "where given), so the segment between y(t) and y_model(t) lies in the box.",
        "The interior residual is lhs - rhs of each equation at each time node; the initial "
        "residual is y_model(t0) - y0.",
        "The interior residual norm is interpolated between the plan's time nodes (see each "
        "term's rigor).",
    )
    bounded_quantities = ("l2_space_time", "l2_final_time", "time_profile")
    reference = REFERENCE
    theory_document = "docs/theory/ode-system.md"
    typical_regularity = ("sup_abs_y", "sup_abs_model_y")
    typical_optional = ("sup_pos_y", "sup_neg_y", "sup_pos_model_y", "sup_neg_model_y")
    typical_components = ("interior", "initial")

    def recognise(self, problem: AnalysedProblem) -> Classified | str:
        if problem.is_steady:
            return "the problem is steady (no time interval); an ODE system evolves in time"
        if problem.domain.space_axes:
            return "the problem has space axes; an ODE system has time only"
        ns = problem.namespace
        names = problem.unknowns
        ys = [ns.field(n, ()) for n in names]
        dys = [ns.field(n, ("t",)) for n in names]
        allowed = set(ys) | set(dys)
        for i, expr in enumerate(problem.numeric):
            others = sorted(
                info.name
                for s in expr.free_symbols
                if s not in allowed
                and (info := ns.describe(s)) is not None
                and info.kind == "field"
            )
            if others:
                return (
                    f"equation {i + 1} contains {', '.join(others)}; an ODE system has the "
                    "unknowns and their first time derivatives only"
                )
        numeric = _solve(problem.numeric, ys, dys, set())
        if isinstance(numeric, str):
            return numeric
        symbolic = _solve(problem.residuals, ys, dys, set(problem.parameter_values))
        assert not isinstance(symbolic, str)
        f_num, m_num = numeric
        jac = f_num.jacobian(ys)
        if jac.has(sympy.sign, sympy.Derivative, sympy.Heaviside, sympy.DiracDelta, sympy.Subs):
            return "F is not continuously differentiable in the unknowns (its Jacobian has jumps)"
        return ClassifiedOdeSystem(
            family=self,
            problem=problem,
            rhs=f_num,
            mass=m_num,
            rhs_symbolic=symbolic[0],
            mass_symbolic=symbolic[1],
        )


def _solve(
    exprs: Sequence[sympy.Expr],
    ys: Sequence[sympy.Symbol],
    dys: Sequence[sympy.Symbol],
    parameters: set[sympy.Symbol],
) -> tuple[sympy.Matrix, sympy.Matrix] | str:
    """``(F, M)`` with ``M y' + b(t, y) = 0`` and ``F = -M^{-1} b``, or why the system is not
    one (``parameters``: symbols a derivative coefficient may contain)."""
    n = len(ys)
    rows = []
    for i, expr in enumerate(exprs):
        split = affine_split(expr, list(dys))
        if isinstance(split, str):
            return f"equation {i + 1} is not linear in the time derivatives ({split})"
        for c in split.coefficients.values():
            if c.free_symbols - parameters:
                return (
                    f"the coefficient of a time derivative in equation {i + 1} depends on "
                    "the unknowns or on t; only constant coefficients are covered"
                )
        rows.append(split)
    mass = sympy.Matrix(n, n, lambda i, j: rows[i].coefficients.get(dys[j], sympy.Integer(0)))
    if mass.det() == 0:
        return (
            "the time derivatives cannot be solved for (their coefficient matrix is singular: "
            "a differential-algebraic system, or an equation without a derivative)"
        )
    b = sympy.Matrix([r.remainder for r in rows])
    rhs = (-(mass.inv() * b)).applyfunc(sympy.expand)
    return rhs, mass


class ClassifiedOdeSystem(Classified):
    """A recognised ODE system ``M y' = G(t, y)``, normalised to ``y' = F(t, y)``."""

    def __init__(
        self,
        *,
        family: Family,
        problem: AnalysedProblem,
        rhs: sympy.Matrix,
        mass: sympy.Matrix,
        rhs_symbolic: sympy.Matrix,
        mass_symbolic: sympy.Matrix,
    ) -> None:
        self.family = family
        self.problem = problem
        ns = problem.namespace
        self.names = problem.unknowns
        self.n = len(self.names)
        self.ys = [ns.field(name, ()) for name in self.names]
        self.t = ns.coordinate("t")
        self.rhs = rhs
        self.jac = rhs.jacobian(self.ys).applyfunc(sympy.expand)
        self.rhs_sym = rhs_symbolic
        self.jac_sym = rhs_symbolic.jacobian(self.ys).applyfunc(sympy.simplify)
        self.mass = mass
        self.mass_sym = mass_symbolic
        self.identity_mass = mass == sympy.eye(self.n)
        # residuals are lhs - rhs = M (y' - F); the bound needs y' - F = M^{-1} (lhs - rhs)
        self.mass_inv = np.array(mass.inv().evalf(30).tolist(), dtype=np.float64)
        self.dependent = [i for i, y in enumerate(self.ys) if self.jac.has(y)]
        self.time_dependent_jacobian = self.jac.has(self.t)
        self._sup_cache: dict[tuple[str, str, float, float], float] = {}

    # -- what the theorem needs ---------------------------------------------------------
    def components(self) -> list[str]:
        return ["interior", "initial"]

    def requirements(self) -> list[Requirement]:
        reqs = []
        for i in self.dependent:
            name = self.names[i]
            reqs.append(
                Requirement(
                    (f"sup_abs_{name}",),
                    "box for the Jacobian bound (the segment between y and y_model)",
                    f"sup |{name}(t)| of the exact solution, per time",
                )
            )
            reqs.append(
                Requirement(
                    (f"sup_abs_model_{name}",),
                    "box for the Jacobian bound (the segment between y and y_model)",
                    f"sup |{name}(t)| of the model, per time",
                )
            )
        return reqs

    def optional_keys(self) -> list[str]:
        keys = []
        for i in self.dependent:
            name = self.names[i]
            keys += [
                f"sup_pos_{name}",
                f"sup_neg_{name}",
                f"sup_pos_model_{name}",
                f"sup_neg_model_{name}",
            ]
        return keys

    def description(self) -> dict[str, object]:
        ns = self.problem.namespace
        out: dict[str, object] = {
            "form": self.family.equation_form,
            "unknowns": list(self.names),
            "right_hand_side": {
                name: to_text(self.rhs_sym[i], ns) for i, name in enumerate(self.names)
            },
            "jacobian": [
                [to_text(self.jac_sym[i, j], ns) for j in range(self.n)] for i in range(self.n)
            ],
            "linear": not self.dependent,
            "constant_jacobian": not self.dependent and not self.time_dependent_jacobian,
            "box_unknowns": [self.names[i] for i in self.dependent],
        }
        if not self.identity_mass:
            out["derivative_matrix"] = [
                [to_text(self.mass_sym[i, j], ns) for j in range(self.n)] for i in range(self.n)
            ]
        return out

    # -- candidates for the rate ---------------------------------------------------------
    def _candidates(self, jac: sympy.Matrix) -> list[_Candidate]:
        n = self.n
        sym = ((jac + jac.T) / 2).applyfunc(sympy.expand)
        out: list[_Candidate] = []
        if n == 1:
            out.append(
                _Candidate(
                    "logarithmic norm: mu_2(J) = J (scalar)",
                    "logarithmic-norm",
                    (jac[0, 0],),
                    lambda v: v[0],
                )
            )
            out.append(
                _Candidate(
                    "Lipschitz: |J| (scalar)", "lipschitz", (sympy.Abs(jac[0, 0]),), lambda v: v[0]
                )
            )
            return out
        if n == 2:
            a, b, d = sym[0, 0], sym[0, 1], sym[1, 1]
            lam = (a + d) / 2 + sympy.sqrt(((a - d) / 2) ** 2 + b**2)
            out.append(
                _Candidate(
                    "logarithmic norm: largest eigenvalue of (J + J^T)/2 (closed form)",
                    "logarithmic-norm",
                    (lam,),
                    lambda v: v[0],
                )
            )
        rows = tuple(
            sym[i, i] + sum((sympy.Abs(sym[i, j]) for j in range(n) if j != i), sympy.Integer(0))
            for i in range(n)
        )
        out.append(
            _Candidate(
                "logarithmic norm: Gershgorin bound on (J + J^T)/2",
                "logarithmic-norm",
                rows,
                lambda v: max(v),
            )
        )
        frob = sum((jac[i, j] ** 2 for i in range(n) for j in range(n)), sympy.Integer(0))
        out.append(
            _Candidate(
                "Lipschitz: Frobenius norm of J (>= ||J||_2)",
                "lipschitz",
                (sympy.expand(frob),),
                lambda v: _sqrt_up(v[0]),
            )
        )
        return out

    def _constant_rate(self) -> tuple[float, str]:
        """Exact-arithmetic J: mu_2 and ||J||_2 by LAPACK, rounded up by a backward-error
        margin (Weyl's perturbation theorem for the symmetric eigenvalue problem)."""
        sym_exact = (self.jac + self.jac.T) / 2
        if sym_exact == sympy.zeros(self.n, self.n):
            mu = 0.0
        else:
            s = np.array(sym_exact.evalf(30).tolist(), dtype=np.float64)
            fro = float(np.linalg.norm(s))
            mu = _up(float(np.max(np.linalg.eigvalsh(s))) + 64 * self.n * _EPS * fro)
        j = np.array(self.jac.evalf(30).tolist(), dtype=np.float64)
        fro_j = float(np.linalg.norm(j))
        lip = _up(float(np.linalg.norm(j, 2)) + 64 * self.n * _EPS * fro_j) if fro_j else 0.0
        if mu <= lip:
            return mu, "logarithmic norm: largest eigenvalue of (J + J^T)/2 (constant J)"
        return lip, "Lipschitz: ||J||_2 (constant J)"  # pragma: no cover - mu_2 <= ||J||_2

    def rate_bound(self, reg: Mapping[str, RegularityValue], t0: float, t1: float) -> RateBound:
        """The certified Gronwall rate on ``[t0, t1]`` (constant, or piecewise constant)."""
        if not self.dependent and not self.time_dependent_jacobian:
            value, method = self._constant_rate()
            return RateBound(Rate(constant=value), value, method, "proven", 1, (), None)
        keys = self._box_keys(reg)
        time_varying = self.time_dependent_jacobian or any(
            not reg[k].is_constant for side in keys.values() for group in side for k in group
        )
        candidates = self._candidates(self.jac)
        rigor: Rigor = "assumed" if self.dependent else "proven"
        warnings: list[str] = []
        if not time_varying:
            box = self._box(keys, reg, t0, t1, warnings)
            value, winner = self._certify(candidates, box, (t0, t1), warnings)
            if not math.isfinite(value):
                raise RegularityError(
                    "regularity_invalid",
                    "the Jacobian of F cannot be bounded on the box of the regularity "
                    f"bounds ({'; '.join(warnings) or 'unbounded'})",
                    f"regularity.sup_abs_{self.names[self.dependent[0]]}",
                )
            return RateBound(Rate(constant=value), value, winner, rigor, 1, tuple(warnings), None)
        edges = self._slab_edges(keys, reg, t0, t1)
        values: list[float] = []
        winners: dict[str, int] = {}
        pole: float | None = None
        for a, b in itertools.pairwise(edges):
            box = self._box(keys, reg, a, b, warnings)
            value, winner = self._certify(candidates, box, (a, b), warnings)
            if not math.isfinite(value):
                pole = a
                break
            values.append(value)
            winners[winner] = winners.get(winner, 0) + 1
        if not values:
            raise RegularityError(
                "regularity_invalid",
                f"the Jacobian of F cannot be bounded on the first time slab "
                f"[{edges[0]:.6g}, {edges[1]:.6g}] ({'; '.join(warnings) or 'unbounded'})",
                f"regularity.sup_abs_{self.names[self.dependent[0]]}" if self.dependent else None,
            )
        finite_edges = edges[: len(values) + 1]
        if pole is not None:
            warnings.append(
                f"the rate cannot be bounded from t = {pole:.6g} on (a regularity bound has a "
                "pole, or the Jacobian is unbounded on the box): the bound ends there"
            )
        method = "; ".join(f"{name} on {count} slab(s)" for name, count in winners.items())
        rate = PiecewiseConstantRate.build(finite_edges, values, pole)
        return RateBound(
            rate, max(values), method, rigor, len(values), tuple(dict.fromkeys(warnings)), pole
        )

    def _box_keys(
        self, reg: Mapping[str, RegularityValue]
    ) -> dict[int, tuple[list[str], list[str], list[str], list[str]]]:
        """Per box unknown: keys bounding (upper exact, lower exact, upper model, lower model)."""
        out = {}
        for i in self.dependent:
            name = self.names[i]
            out[i] = tuple(
                [k for k in (f"sup_abs_{who}{name}", f"sup_{side}_{who}{name}") if k in reg]
                for who, side in (("", "pos"), ("", "neg"), ("model_", "pos"), ("model_", "neg"))
            )
        return out  # type: ignore[return-value]

    def _box(
        self,
        keys: Mapping[int, Sequence[list[str]]],
        reg: Mapping[str, RegularityValue],
        a: float,
        b: float,
        warnings: list[str],
    ) -> dict[sympy.Symbol, tuple[float, float]]:
        box: dict[sympy.Symbol, tuple[float, float]] = {}
        for i, (up_e, lo_e, up_m, lo_m) in keys.items():
            sides = []
            for group in (up_e, lo_e, up_m, lo_m):
                if not group:
                    raise RegularityError(
                        "regularity_missing",
                        f"the Jacobian depends on {self.names[i]}: the theorem needs "
                        f"sup_abs_{self.names[i]} and sup_abs_model_{self.names[i]}",
                        f"regularity.sup_abs_{self.names[i]}",
                    )
                sides.append(min(self._slab_sup_cached(reg[k], a, b, warnings) for k in group))
            hi = max(sides[0], sides[2])
            lo = max(sides[1], sides[3])
            box[self.ys[i]] = (-lo, hi)
        return box

    def _slab_sup_cached(
        self, value: RegularityValue, a: float, b: float, warnings: list[str]
    ) -> float:
        key = (value.key, str(value.source), a, b)
        if key not in self._sup_cache:
            if len(self._sup_cache) > 50_000:
                self._sup_cache.clear()
            self._sup_cache[key] = _slab_sup(value, a, b, warnings)
        return self._sup_cache[key]

    def _certify(
        self,
        candidates: Sequence[_Candidate],
        box: Mapping[sympy.Symbol, tuple[float, float]],
        slab: tuple[float, float],
        warnings: list[str],
    ) -> tuple[float, str]:
        if any(not (math.isfinite(lo) and math.isfinite(hi)) for lo, hi in box.values()):
            return math.inf, ""
        best, winner = math.inf, ""
        for cand in candidates:
            sups = []
            try:
                for expr in cand.exprs:
                    sub = {s: r for s, r in box.items() if expr.has(s)}
                    if expr.has(self.t):
                        sub[self.t] = slab
                    sups.append(_sup(expr, sub))
            except IntervalError as exc:
                warnings.append(f"{cand.name}: no interval bound ({exc})")
                continue
            value = cand.combine(sups)
            if value < best:
                best, winner = value, cand.name
        return best, winner

    def _slab_edges(
        self,
        keys: Mapping[int, Sequence[list[str]]],
        reg: Mapping[str, RegularityValue],
        t0: float,
        t1: float,
    ) -> list[float]:
        edges = set(np.linspace(t0, t1, SLABS + 1).tolist())
        h = (t1 - t0) / SLABS
        for side in keys.values():
            for group in side:
                for k in group:
                    for p in reg[k].poles:
                        if t0 < p <= t1:
                            edges.add(p)
                            edges.update(
                                p - h * 0.5**j
                                for j in range(1, POLE_REFINEMENT + 1)
                                if p - h * 0.5**j > t0
                            )
        return sorted(edges)

    # -- constants as shown to users ------------------------------------------------------
    def constants(self) -> list[ConstantInfo]:
        ns = self.problem.namespace
        jac_text = (
            "["
            + ", ".join(
                "[" + ", ".join(to_text(self.jac_sym[i, j], ns) for j in range(self.n)) + "]"
                for i in range(self.n)
            )
            + "]"
        )
        jac_latex = (
            r"\begin{pmatrix}"
            + r" \\ ".join(
                " & ".join(to_latex(self.jac_sym[i, j], ns) for j in range(self.n))
                for i in range(self.n)
            )
            + r"\end{pmatrix}"
        )
        cands = self._candidates(self.jac_sym)
        mu_c = next(c for c in cands if c.kind == "logarithmic-norm")
        lip_c = next(c for c in cands if c.kind == "lipschitz")
        mu_text = " max ".join(f"sup({to_text(e, ns)})" for e in mu_c.exprs)
        lip_text = (
            f"sqrt(sup({to_text(lip_c.exprs[0], ns)}))"
            if self.n > 1
            else f"sup({to_text(lip_c.exprs[0], ns)})"
        )
        box = (
            "the box |" + "|, |".join(self.names[i] for i in self.dependent) + "| <= "
            "max(sup_abs, sup_abs_model) (tightened by sup_pos_/sup_neg_ where given)"
            if self.dependent
            else "no box: J does not depend on the unknowns"
        )
        assumed: Rigor = "assumed" if self.dependent else "proven"
        return [
            ConstantInfo(
                name="Jacobian of the right-hand side",
                symbol="J(t, y) = dF/dy",
                expression=jac_text,
                latex=jac_latex,
                derivation=(
                    "F = M^{-1} (rhs - lhs without the derivatives), M the constant matrix of "
                    "the derivative coefficients (the identity for y_i' = F_i).",
                    "J = dF/dy symbolically (sympy).",
                ),
                reference=REFERENCE,
                rigor="proven",
            ),
            ConstantInfo(
                name="one-sided (logarithmic-norm) rate",
                symbol="mu(t)",
                expression=mu_text,
                latex=r"\mu(t) \ge \sup_{y \in B(t)} \lambda_{\max}\big((J + J^T)/2\big)",
                derivation=(
                    "e = y_model - y solves e' = Jbar e + r, Jbar = int_0^1 J(t, y + s e) ds "
                    "(mean value theorem in integral form).",
                    "(|e|^2/2)' = e.Jbar e + e.r <= mu_2(Jbar) |e|^2 + |e| |r| (Cauchy-Schwarz).",
                    "e.J e <= lambda_max((J + J^T)/2) |e|^2 at every point of the segment, "
                    "hence mu_2(Jbar) <= sup over the segment of mu_2(J) (Dahlquist 1958; "
                    "Soderlind 2006).",
                    f"The segment lies in {box}; the sup is bounded by interval branch and "
                    "bound (Moore, Kearfott, Cloud 2009), per time slab when the box or J "
                    "depends on t.",
                    "For two unknowns lambda_max is the closed form (a+d)/2 + sqrt(((a-d)/2)^2 "
                    "+ b^2); Gershgorin's theorem on (J + J^T)/2 is also tried.",
                ),
                reference=REFERENCE,
                rigor=assumed,
            ),
            ConstantInfo(
                name="Lipschitz rate (alternative)",
                symbol="L(t)",
                expression=lip_text,
                latex=r"L(t) \ge \sup_{y \in B(t)} \|J\|_F \ge \sup \|J\|_2",
                derivation=(
                    "e.Jbar e <= ||Jbar||_2 |e|^2 <= sup ||J||_F |e|^2 (Hillebrecht & Unger "
                    "2022 use the Lipschitz constant of F).",
                    "mu_2(J) <= ||J||_2 always; both are bounded by intervals and the smaller "
                    "bound is used on each time slab.",
                ),
                reference=REFERENCE,
                rigor=assumed,
            ),
            ConstantInfo(
                name="Gronwall rate of |e|",
                symbol="a(t)",
                expression="min(mu(t), L(t))",
                latex=r"a(t) = \min(\mu(t), L(t))",
                derivation=(
                    "d|e|/dt <= a(t) |e| + |r(t)| (divide (|e|^2/2)' by |e| where e != 0; "
                    "at e = 0 the upper Dini derivative of |e| is <= |r|).",
                    "|e(t)| <= e^{A(t0,t)} |e(t0)| + int_t0^t e^{A(s,t)} |r(s)| ds, "
                    "A(s,t) = int_s^t a (linear Gronwall, no Young weight).",
                ),
                reference=REFERENCE,
                rigor=assumed,
            ),
        ]

    # -- the inequality --------------------------------------------------------------------
    def _residual_norms(self, inputs: CertifyInputs) -> tuple[float, FloatArray, FloatArray]:
        plan, res = inputs.plan, inputs.residuals
        grid = plan.time
        assert grid is not None
        r0 = np.asarray(res["initial"], dtype=np.float64).reshape(-1, self.n)
        # rounded up by 1e-12 relative: covers the rounding of the norm and of the assembly's
        # log-space representation (|log Y| * eps), so the bound at t0 is never below |e(t0)|
        e0 = float(np.sqrt(np.sum(np.square(r0[0])))) * (1 + 1e-12)
        r = np.asarray(res["interior"], dtype=np.float64).reshape(-1, self.n)
        if not self.identity_mass:
            r = r @ self.mass_inv.T
        norms = np.sqrt(np.einsum("ij,ij->i", r, r)) * (1 + 4 * _EPS)
        comp = plan.components["interior"]
        index = (
            comp.time_index if comp.time_index is not None else np.arange(grid.size, dtype=np.int64)
        )
        per_node = np.zeros(grid.size)
        np.maximum.at(per_node, index, norms)
        if index.size == grid.size and np.array_equal(np.sort(index), np.arange(grid.size)):
            vectors = np.empty_like(r)
            vectors[index] = r
            steps = np.sqrt(np.sum(np.square(np.diff(vectors, axis=0)), axis=1))
        else:  # pragma: no cover - Gauss-Legendre plans have one point per time node
            steps = np.abs(np.diff(per_node))
        panel = grid.nodes_per_panel if grid.mode != "linear" else grid.size
        return e0, per_node, _near_zero_steps(per_node, steps, panel)

    @staticmethod
    def _smooth_majorant(norms: FloatArray, steps: FloatArray) -> FloatArray:
        """A smooth function of time above ``|r|``: ``(2|r|^2 + c^2) / (2 sqrt(|r|^2 + c^2))``.

        ``|r(t)|`` has kinks where a component of ``r`` changes sign, and the assembly
        interpolates the forcing by the panel polynomial through the nodes, which can undershoot
        a kinked function. ``|r|^2`` is smooth; by the AM-GM inequality
        ``|r| <= (|r|^2/delta + delta)/2`` for any ``delta > 0``, and ``delta = sqrt(|r|^2 + c^2)``
        gives a function that is analytic in ``t`` at distance ~``c/|r'|`` from the real axis,
        exceeds ``|r|`` by at most ``c/2`` (where ``r = 0``) and by ``O(c^4/|r|^3)`` elsewhere.
        ``c_k = SMOOTHING * (largest change of r between neighbouring nodes near a zero of r in
        the interpolation panel of node k)`` puts that distance at about ``SMOOTHING`` node
        spacings; on a panel where ``|r|`` stays away from zero it is smooth already and
        ``c_k = 0``. One width per panel, not one for the whole grid: with many panels, a
        large oscillating residual late in time no longer lifts the forcing at every early
        small-residual node (ode-system.md step 14).
        """
        c = SMOOTHING * steps
        if not np.any(c > 0):
            return norms
        sq = np.square(norms)
        return np.asarray((2 * sq + c * c) / (2 * np.sqrt(sq + c * c)), dtype=np.float64)

    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        """The linear (norm) form: ``|e|' <= a(t) |e| + |r(t)|``, ``|e(t0)| = |R_0|``."""
        return self._inequality(inputs, squared=False)

    def squared_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        """The squared form with a Young weight, ``Y = |e|^2``:
        ``Y' <= (lambda + 2 a(t)) Y + |r|^2 / lambda``. Valid but never tighter than the norm
        form (see ``docs/theory/ode-system.md``); kept for comparison."""
        return self._inequality(inputs, squared=True)

    def _inequality(self, inputs: CertifyInputs, *, squared: bool) -> EnergyInequality:
        plan, reg = inputs.plan, inputs.regularity
        grid = plan.time
        assert grid is not None
        e0, rho, steps = self._residual_norms(inputs)
        bound = self.rate_bound(reg, grid.t0, grid.t_end)
        constants = self.constants()
        constants[1] = constants[1].with_value(bound.max_value, bound.rigor)
        constants[2] = constants[2].with_value(None, bound.rigor)
        constants[3] = constants[3].with_value(bound.max_value, bound.rigor)
        constants.append(
            ConstantInfo(
                name="rate actually used",
                symbol="a(t)",
                expression=(
                    f"{bound.max_value:.17g}"
                    if bound.slabs == 1
                    else f"piecewise constant on {bound.slabs} slabs, max {bound.max_value:.6g}"
                ),
                latex=rf"a(t) \le {bound.max_value:.6g}",
                derivation=(bound.method,),
                reference=REFERENCE,
                value=bound.max_value,
                rigor=bound.rigor,
            )
        )
        warnings = list(bound.warnings)
        interior_detail = (
            "the residual M^{-1}(lhs - rhs) at each time node, interpolated between the nodes"
            + ("" if squared else " (a smooth majorant of its norm, see ode-system.md step 7)")
        )
        if squared:
            rate = bound.rate
            rate = (
                rate.scaled(2.0)
                if isinstance(rate, PiecewiseConstantRate)
                else Rate(constant=2.0 * float(rate.constant or 0.0))
            )
            return EnergyInequality(
                base_rate=rate,
                initial=float(e0 * e0),
                initial_info=SourceInfo(
                    "initial residual",
                    "|e(t0)|^2",
                    "|y_model(t0) - y0|^2",
                    "proven",
                    "a single point: no quadrature",
                ),
                residual=np.square(rho),
                residual_info=SourceInfo(
                    "interior residual",
                    "|r|^2/lambda",
                    "int_t0^t e^{A(s,t)} |r(s)|^2 / lambda ds",
                    "heuristic",
                    interior_detail,
                ),
                constants=constants,
                warnings=warnings,
                failed_hypotheses=self._contradictions(inputs),
                rate_rigor=bound.rigor,
                inputs={"rate_max": bound.max_value, "slabs": float(bound.slabs)},
                squared=True,
            )
        return EnergyInequality(
            base_rate=bound.rate,
            initial=e0,
            initial_info=SourceInfo(
                "initial residual",
                "|e(t0)|",
                "e^{A(t0,t)} |y_model(t0) - y0|",
                "proven",
                "a single point: no quadrature",
            ),
            residual=None,
            residual_info=None,
            forcing={"interior": self._smooth_majorant(rho, steps)},
            forcing_info={
                "interior": SourceInfo(
                    "interior residual",
                    "int e^{A(s,t)} |r(s)| ds",
                    "int_t0^t e^{A(s,t)} |y_model'(s) - F(s, y_model(s))| ds",
                    "heuristic",
                    interior_detail,
                )
            },
            nonnegative=("interior",),
            constants=constants,
            warnings=warnings,
            failed_hypotheses=self._contradictions(inputs),
            rate_rigor=bound.rigor,
            inputs={"rate_max": bound.max_value, "slabs": float(bound.slabs)},
            squared=False,
        )

    def _contradictions(self, inputs: CertifyInputs) -> list[str]:
        """Regularity values below the initial data (exact) or the model's initial value."""
        found: list[str] = []
        plan, res, reg = inputs.plan, inputs.residuals, inputs.regularity
        if self.problem.initial_values is None or plan.time is None:
            return found
        t0 = np.array([plan.time.t0])
        try:
            y0 = [float(v) for v in self.problem.initial_values]
        except TypeError:  # pragma: no cover - initial values are constants for an ODE
            return found
        r0 = np.asarray(res["initial"], dtype=np.float64).reshape(-1, self.n)[0]
        for i, name in enumerate(self.names):
            for who, value in (("", y0[i]), ("model_", y0[i] + float(r0[i]))):
                for kind, observed in (
                    ("abs", abs(value)),
                    ("pos", max(value, 0.0)),
                    ("neg", max(-value, 0.0)),
                ):
                    key = f"sup_{kind}_{who}{name}"
                    if key not in reg:
                        continue
                    bound = float(reg[key].at(t0)[0])
                    if observed > bound * (1 + REL_SLACK) + ABS_SLACK:
                        what = "the initial value" if not who else "the model's initial value"
                        found.append(
                            f"{key} = {reg[key].describe()} is below {what} of {name}: "
                            f"{observed:.6g} at t = {plan.time.t0:g}"
                        )
        return found


def _near_zero_steps(norms: FloatArray, steps: FloatArray, panel: int) -> FloatArray:
    """Per node: the largest change of ``r`` between neighbouring nodes at the nodes of its
    interpolation panel (``panel`` consecutive nodes) where ``|r|`` may pass through zero
    (``|r_j|`` at most 3 times an adjacent change); 0 on panels without such a node.

    Panel-wide, not node-local: the assembly interpolates each panel by one polynomial, so a
    kink anywhere in a panel makes the interpolant ring over the whole panel; a node-local
    width left an exactly tight case 4e-6 relative below the truth far from the kink."""
    out = np.zeros(norms.size)
    if steps.size == 0:
        return out
    left = np.concatenate([[0.0], steps])
    right = np.concatenate([steps, [0.0]])
    adjacent = np.maximum(left, right)
    near = np.where(norms <= 3.0 * adjacent, adjacent, 0.0)
    for start in range(0, norms.size, max(1, panel)):
        out[start : start + panel] = near[start : start + panel].max()
    return out


def _slab_sup(value: RegularityValue, a: float, b: float, warnings: list[str]) -> float:
    """A certified upper bound of a regularity value over ``[a, b]`` (``inf`` at a pole)."""
    if value.constant is not None:
        return float(value.constant)
    if any(a <= p <= b for p in value.poles):
        return math.inf
    assert value.expression is not None
    try:
        # the only free symbol of a regularity expression is the time coordinate
        span = {s: (a, b) for s in value.expression.free_symbols}
        return _sup(value.expression, span)
    except IntervalError as exc:
        warnings.append(
            f"{value.key} = {value.source}: no interval bound on [{a:.6g}, {b:.6g}] ({exc})"
        )
        return math.inf
