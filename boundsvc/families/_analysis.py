"""From the problem as typed to sympy objects in our internal symbols (no evaluation of text)."""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from fractions import Fraction

import sympy

from api_schemas import ProblemSpec
from boundsvc.domain import Domain
from boundsvc.errors import ProblemInvalid
from boundsvc.expr import ExpressionError, Namespace, parse_equation, parse_expression


def exact(value: float) -> sympy.Rational:
    """The float as an exact rational (no string parsing)."""
    frac = Fraction(value)
    return sympy.Rational(frac.numerator, frac.denominator)


#: Fields added to ProblemSpec after problems were first stored: left out of the content
#: address while unset, so a problem that does not use them keeps the id it always had.
_LATER_FIELDS = ("initial_velocity",)


def problem_sha256(problem: ProblemSpec) -> str:
    """SHA-256 of the canonical JSON of a problem (its content address)."""
    body = problem.model_dump(mode="json")
    for name in _LATER_FIELDS:
        if body.get(name) is None:
            body.pop(name, None)
    canonical = json.dumps(body, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(canonical.encode()).hexdigest()


@dataclass(frozen=True)
class AnalysedProblem:
    """A parsed problem. ``residuals`` are ``lhs - rhs`` with parameters still symbolic;
    ``numeric`` substitutes the parameter values exactly."""

    spec: ProblemSpec
    domain: Domain
    namespace: Namespace
    residuals: tuple[sympy.Expr, ...]
    numeric: tuple[sympy.Expr, ...]
    parameter_values: dict[sympy.Symbol, sympy.Rational]
    initial_values: tuple[sympy.Expr, ...] | None
    boundary_value: sympy.Expr | None
    sha256: str

    @property
    def unknowns(self) -> tuple[str, ...]:
        return tuple(self.spec.unknowns or ["u"])

    @property
    def is_steady(self) -> bool:
        return self.spec.time is None

    def substitute(self, expr: sympy.Expr) -> sympy.Expr:
        return expr.xreplace(self.parameter_values)


def _wrap(exc: ExpressionError, field: str) -> ProblemInvalid:
    return ProblemInvalid(exc.code, f"{field}: {exc}", field, position=exc.position)


def analyse(spec: ProblemSpec) -> AnalysedProblem:
    """Parse the equation(s) and data of a problem; raise ProblemInvalid naming the field."""
    domain = Domain.from_problem(spec)
    coords = (("t",) if spec.time is not None else ()) + tuple(spec.space)
    unknowns = tuple(spec.unknowns or ["u"])
    equations = [spec.equation] if isinstance(spec.equation, str) else list(spec.equation)
    if len(unknowns) != len(equations):
        raise ProblemInvalid(
            "problem_unknowns_mismatch",
            f"{len(equations)} equation(s) but {len(unknowns)} unknown(s) "
            f"({', '.join(unknowns)}); give one equation per unknown",
            "problem.unknowns",
        )
    try:
        ns = Namespace(coordinates=coords, unknowns=unknowns, parameters=tuple(spec.parameters))
    except ExpressionError as exc:
        raise _wrap(exc, "problem.parameters") from exc
    residuals: list[sympy.Expr] = []
    for i, text in enumerate(equations):
        field = "problem.equation" if isinstance(spec.equation, str) else f"problem.equation.{i}"
        try:
            lhs, rhs = parse_equation(text, ns)
        except ExpressionError as exc:
            raise _wrap(exc, field) from exc
        residuals.append(sympy.expand(lhs - rhs))
    values = {ns.parameter(name): exact(v) for name, v in spec.parameters.items()}
    numeric = tuple(sympy.expand(r.xreplace(values)) for r in residuals)

    data_ns = Namespace(coordinates=coords, unknowns=(), parameters=tuple(spec.parameters))
    initial: tuple[sympy.Expr, ...] | None = None
    if spec.initial_value is not None:
        texts = [spec.initial_value] if isinstance(spec.initial_value, str) else spec.initial_value
        if len(texts) != len(unknowns):
            raise ProblemInvalid(
                "problem_invalid", "give one initial value per unknown", "problem.initial_value"
            )
        parsed = []
        for i, text in enumerate(texts):
            try:
                expr = parse_expression(text, data_ns)
            except ExpressionError as exc:
                raise _wrap(exc, "problem.initial_value") from exc
            if spec.time is not None and expr.has(ns.coordinate("t")):
                raise ProblemInvalid(
                    "problem_invalid",
                    "the initial value must not depend on t",
                    "problem.initial_value",
                )
            parsed.append(expr.xreplace(values))
            del i
        initial = tuple(parsed)
    boundary: sympy.Expr | None = None
    if spec.boundary_value is not None:
        try:
            boundary = parse_expression(spec.boundary_value, data_ns).xreplace(values)
        except ExpressionError as exc:
            raise _wrap(exc, "problem.boundary_value") from exc
    return AnalysedProblem(
        spec=spec,
        domain=domain,
        namespace=ns,
        residuals=tuple(residuals),
        numeric=numeric,
        parameter_values=values,
        initial_values=initial,
        boundary_value=boundary,
        sha256=problem_sha256(spec),
    )
