"""Regularity values: numbers or expressions in ``t`` bounding the exact solution (or model).

A value is a number or an expression string in ``t`` (parsed by our own grammar, never
evaluated as code). It bounds a sup over space at each time, so it must be >= 0 wherever the
bound is used; the times where an expression diverges (its poles) end the bound.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import sympy
from numpy.typing import NDArray
from scipy.optimize import brentq

from boundsvc.errors import RegularityError
from boundsvc.expr import ExpressionError, parse_time_function, time_symbol

FloatArray = NDArray[np.float64]

_SCAN_POINTS = 4097


@dataclass(frozen=True)
class RegularityValue:
    """One regularity key's value as a function of time."""

    key: str
    source: float | str
    constant: float | None
    expression: sympy.Expr | None
    function: Callable[[FloatArray], FloatArray]
    poles: tuple[float, ...]

    @property
    def is_constant(self) -> bool:
        return self.constant is not None

    def at(self, t: FloatArray | float) -> FloatArray:
        """Values at the given times (vectorised)."""
        arr = np.atleast_1d(np.asarray(t, dtype=np.float64))
        if self.constant is not None:
            return np.full(arr.shape, self.constant)
        with np.errstate(all="ignore"):
            return np.asarray(np.broadcast_to(self.function(arr), arr.shape), dtype=np.float64)

    def describe(self) -> str:
        return str(self.source)


def _constant_function(value: float) -> Callable[[FloatArray], FloatArray]:
    def constant(t: FloatArray) -> FloatArray:
        return np.full(np.shape(t), value)

    return constant


def _vectorised(expr: sympy.Expr) -> Callable[[FloatArray], FloatArray]:
    t = time_symbol()
    # lambdify is safe here: the expression was built by our parser, and its only symbol is our
    # internal time symbol (no user-chosen names reach the generated code).
    func = sympy.lambdify(t, expr, modules="numpy")

    def evaluate(values: FloatArray) -> FloatArray:
        with np.errstate(all="ignore"):
            out = func(values)
        return np.broadcast_to(np.asarray(out, dtype=np.float64), np.shape(values)).copy()

    return evaluate


def _singular_bases(expr: sympy.Expr) -> list[sympy.Expr]:
    """Sub-expressions whose zeros make ``expr`` undefined or infinite."""
    bases: list[sympy.Expr] = []
    for node in sympy.preorder_traversal(expr):
        if isinstance(node, sympy.Pow):
            base, exp = node.args
            if exp.is_number and exp.is_negative:
                bases.append(base)
            elif exp.is_number and not exp.is_integer:
                bases.append(base)  # fractional powers: undefined below zero
        elif isinstance(node, sympy.log):
            bases.append(node.args[0])
        elif isinstance(node, sympy.tan):
            bases.append(sympy.cos(node.args[0]))
    return bases


def find_poles(expr: sympy.Expr, t0: float, t_end: float) -> tuple[float, ...]:
    """Times in ``(t0, t_end]`` where ``expr`` is singular (sorted)."""
    t = time_symbol()
    found: set[float] = set()
    grid = np.linspace(t0, t_end, _SCAN_POINTS)
    for base in _singular_bases(expr):
        if not base.has(t):
            continue
        try:
            poly = sympy.Poly(base, t)
        except sympy.PolynomialError:
            poly = None
        if poly is not None and poly.degree() <= 12:
            for root in poly.real_roots():
                value = float(root)
                if t0 < value <= t_end:
                    found.add(value)
            continue
        base_fn = _vectorised(base)
        values = base_fn(grid)
        for i in range(grid.size - 1):
            a, b = values[i], values[i + 1]
            if not (math.isfinite(a) and math.isfinite(b)):
                found.add(float(grid[i + 1] if math.isfinite(a) else grid[i]))
            elif a == 0.0:
                found.add(float(grid[i]))
            elif a * b < 0:
                found.add(
                    float(
                        brentq(
                            lambda s, f=base_fn: float(f(np.array([s]))[0]),
                            grid[i],
                            grid[i + 1],
                        )
                    )
                )
    values = _vectorised(expr)(grid)
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        found.add(float(grid[bad[0]]))
    return tuple(sorted(v for v in found if t0 < v <= t_end or (v == t0 and bad.size)))


def parse_regularity(
    key: str,
    value: float | str,
    time: tuple[float, float] | None,
    parameters: Mapping[str, float],
) -> RegularityValue:
    """Parse and check one regularity value; raise RegularityError naming the key on failure."""
    field = f"regularity.{key}"
    if isinstance(value, bool):
        raise RegularityError(
            "regularity_invalid", f"{key} must be a number or an expression", field
        )
    if isinstance(value, int | float):
        number = float(value)
        if not math.isfinite(number):
            raise RegularityError(
                "regularity_invalid", f"{key} must be finite, got {value!r}", field
            )
        if number < 0:
            raise RegularityError(
                "regularity_negative",
                f"{key} bounds a supremum of a non-negative quantity, so it "
                f"must be >= 0, got {number}",
                field,
            )
        return RegularityValue(
            key=key,
            source=number,
            constant=number,
            expression=None,
            function=_constant_function(number),
            poles=(),
        )
    try:
        expr = parse_time_function(value, parameters)
    except ExpressionError as exc:
        raise RegularityError(exc.code, f"{key}: {exc}", field, position=exc.position) from exc
    if not expr.has(time_symbol()):
        number = float(expr)
        return (
            parse_regularity(key, number, time, parameters)
            if math.isfinite(number)
            else _raise_nonfinite(key, field)
        )
    if time is None:
        raise RegularityError(
            "regularity_invalid", f"{key} depends on t but the problem is steady", field
        )
    poles = find_poles(expr, time[0], time[1])
    func = _vectorised(expr)
    end = poles[0] if poles else time[1]
    grid = np.linspace(time[0], end, _SCAN_POINTS)
    if poles:
        grid = grid[:-1]
    values = func(grid)
    negative = np.flatnonzero(values < 0)
    if negative.size:
        t_bad = float(grid[negative[0]])
        raise RegularityError(
            "regularity_negative",
            f"{key} = {value} is negative at t = {t_bad:.6g}; a bound on a "
            "supremum must be >= 0 on the whole time interval",
            field,
        )
    return RegularityValue(
        key=key, source=value, constant=None, expression=expr, function=func, poles=poles
    )


def _raise_nonfinite(key: str, field: str) -> RegularityValue:
    raise RegularityError(
        "regularity_invalid", f"{key} does not evaluate to a finite number", field
    )


def check_keys(
    given: Mapping[str, object], allowed: Sequence[str], requirements: Sequence[Sequence[str]]
) -> None:
    """Reject unknown keys and report the first unmet requirement (each an ``any_of`` group)."""
    for key in given:
        if key not in allowed:
            hint = ", ".join(sorted(allowed)) or "none"
            raise RegularityError(
                "regularity_unknown_key",
                f"regularity key {key!r} is not used by this problem's theorem "
                f"(accepted keys: {hint})",
                f"regularity.{key}",
            )
    for group in requirements:
        if not any(k in given for k in group):
            alternatives = " or ".join(group)
            raise RegularityError(
                "regularity_missing",
                f"the theorem needs {alternatives}; it is missing",
                f"regularity.{group[0]}",
            )
