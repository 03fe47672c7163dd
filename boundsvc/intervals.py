"""Certified enclosures of the range of an expression over a box (interval arithmetic).

The range of a sympy expression over a box is enclosed by evaluating it in interval arithmetic
(mpmath's ``iv`` context, outward rounding), and tightened by bisecting the box (branch and
bound): the maximum over the sub-boxes of the interval upper ends is a certified upper bound of
the supremum, because every sub-box enclosure contains the true range on it.

References
----------
.. [1] R. E. Moore, R. B. Kearfott, M. J. Cloud, "Introduction to Interval Analysis", SIAM 2009,
   ch. 5-6 (natural interval extensions, subdivision).
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Mapping
from typing import Any

import mpmath
import sympy

_iv = mpmath.iv


class IntervalError(ArithmeticError):
    """The expression cannot be enclosed (unsupported operation, or unbounded on the box)."""


def _enclose(expr: sympy.Expr, box: Mapping[sympy.Symbol, Any]) -> Any:
    if expr.is_Symbol:
        if expr not in box:
            raise IntervalError(f"symbol {expr} has no range")
        return box[expr]
    if expr.is_Integer or expr.is_Rational:
        p, q = int(expr.p), int(expr.q)
        return _iv.mpf(p) / q
    if expr.is_Number:
        return _iv.mpf(str(sympy.Float(expr, 30)))
    if expr is sympy.pi:
        return _iv.pi
    if expr is sympy.E:
        return _iv.e
    if isinstance(expr, sympy.Add):
        total = _iv.mpf(0)
        for arg in expr.args:
            total = total + _enclose(arg, box)
        return total
    if isinstance(expr, sympy.Mul):
        prod = _iv.mpf(1)
        for arg in expr.args:
            prod = prod * _enclose(arg, box)
        return prod
    if isinstance(expr, sympy.Pow):
        base, exp = expr.args
        b = _enclose(base, box)
        if exp.is_Integer:
            n = int(exp)
            if n >= 0:
                return b**n
            if _contains_zero(b):
                raise IntervalError("division by an interval containing zero")
            return 1 / b ** (-n)
        if exp == sympy.Rational(1, 2):
            if b.a < 0:
                raise IntervalError("square root of a possibly negative interval")
            return _iv.sqrt(b)
        e = _enclose(exp, box)
        if b.a <= 0:
            raise IntervalError("power with a non-positive base and a non-integer exponent")
        return _iv.exp(e * _iv.log(b))
    functions = {
        sympy.sin: _iv.sin,
        sympy.cos: _iv.cos,
        sympy.exp: _iv.exp,
        sympy.tanh: _iv_tanh,
        sympy.sinh: _iv_sinh,
        sympy.cosh: _iv_cosh,
    }
    for kind, func in functions.items():
        if isinstance(expr, kind):
            return func(_enclose(expr.args[0], box))
    if isinstance(expr, sympy.log):
        x = _enclose(expr.args[0], box)
        if x.a <= 0:
            raise IntervalError("logarithm of a possibly non-positive interval")
        return _iv.log(x)
    if isinstance(expr, sympy.Abs):
        x = _enclose(expr.args[0], box)
        lo, hi = x.a, x.b
        if lo >= 0:
            return x
        if hi <= 0:
            return -x
        return _iv.mpf([0, max(-lo, hi)])
    if isinstance(expr, sympy.tan):
        x = _enclose(expr.args[0], box)
        c = _iv.cos(x)
        if _contains_zero(c):
            raise IntervalError("tangent near a pole")
        return _iv.sin(x) / c
    raise IntervalError(f"no interval extension for {type(expr).__name__}")


def _contains_zero(x: Any) -> bool:
    return bool(x.a <= 0 <= x.b)


def _iv_tanh(x: Any) -> Any:
    # tanh is increasing: enclose by its values at the ends (computed in intervals)
    lo = _iv.mpf(x.a)
    hi = _iv.mpf(x.b)
    f_lo = 1 - 2 / (_iv.exp(2 * lo) + 1)
    f_hi = 1 - 2 / (_iv.exp(2 * hi) + 1)
    return _iv.mpf([f_lo.a, f_hi.b])


def _iv_sinh(x: Any) -> Any:
    return (_iv.exp(x) - _iv.exp(-x)) / 2


def _iv_cosh(x: Any) -> Any:
    lo, hi = x.a, x.b
    ends = (_iv.exp(x) + _iv.exp(-x)) / 2
    if lo <= 0 <= hi:
        return _iv.mpf([1, ends.b])
    return ends


def enclose(
    expr: sympy.Expr, box: Mapping[sympy.Symbol, tuple[float, float]]
) -> tuple[float, float]:
    """One interval enclosure ``[lo, hi]`` of ``expr`` over ``box`` (no subdivision)."""
    # mpmath's interval context works at 53 bits with outward rounding, so the float ends of
    # the result are exact enclosure ends (no change of the shared precision setting).
    ivbox = {s: _iv.mpf([lo, hi]) for s, (lo, hi) in box.items()}
    try:
        value = _enclose(expr, ivbox)
    except (ZeroDivisionError, OverflowError, ValueError, TypeError) as exc:
        raise IntervalError(str(exc)) from exc
    lo, hi = float(value.a), float(value.b)
    if math.isnan(lo) or math.isnan(hi):
        raise IntervalError("the enclosure is undefined")
    return lo, hi


def certified_max(
    expr: sympy.Expr,
    box: Mapping[sympy.Symbol, tuple[float, float]],
    *,
    max_boxes: int = 400,
    rel_tol: float = 1e-3,
) -> float:
    """A certified upper bound of ``sup expr`` over ``box`` by interval branch and bound.

    Boxes are split along their widest side, best-first by their upper bound; the search stops
    when the best upper bound is within ``rel_tol`` of a lower bound (the value at a box
    centre) or after ``max_boxes`` enclosures. The returned number is always >= the true sup.
    """
    symbols = list(box)
    if not symbols or not (expr.free_symbols & set(symbols)):
        if expr.free_symbols - set(symbols):
            raise IntervalError("the expression has symbols without a range")
        return enclose(expr, {})[1]
    counter = 0
    start = {s: (float(lo), float(hi)) for s, (lo, hi) in box.items()}
    heap: list[tuple[float, int, dict[sympy.Symbol, tuple[float, float]]]] = []
    hi0 = enclose(expr, start)[1]
    heapq.heappush(heap, (-hi0, counter, start))
    lower = -math.inf
    evaluations = 1
    while heap:
        neg_hi, _, current = heapq.heappop(heap)
        best_upper = -neg_hi
        centre = {s: 0.5 * (lo + hi) for s, (lo, hi) in current.items()}
        point = enclose(expr, {s: (c, c) for s, c in centre.items()})[0]
        lower = max(lower, point)
        if best_upper - lower <= rel_tol * max(1.0, abs(lower)) or evaluations >= max_boxes:
            return max(best_upper, max((-h for h, _, _ in heap), default=-math.inf))
        axis = max(current, key=lambda s: current[s][1] - current[s][0])
        lo, hi = current[axis]
        mid = 0.5 * (lo + hi)
        for part in ((lo, mid), (mid, hi)):
            child = dict(current)
            child[axis] = part
            counter += 1
            evaluations += 1
            heapq.heappush(heap, (-enclose(expr, child)[1], counter, child))
    return lower  # pragma: no cover - the loop always returns


def certified_min(
    expr: sympy.Expr, box: Mapping[sympy.Symbol, tuple[float, float]], **kwargs: float
) -> float:
    """A certified lower bound of ``inf expr`` over ``box``."""
    return -certified_max(-expr, box, **kwargs)  # type: ignore[arg-type]
