"""Property tests: total robustness, printing round trips, and an outside reference.

Each property keeps its example count small enough to run in a few seconds; the
strategies live in ``tests/strategies.py``.
"""

from __future__ import annotations

import math
import time
from typing import Any

import sympy
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from boundsvc.expr import (
    ExpressionError,
    ExpressionLimits,
    parse_equation,
    parse_expression,
    parse_time_function,
    to_latex,
    to_text,
)
from tests.strategies import NAMESPACE, GeneratedExpression, expressions, grammar_soup

CALL_BUDGET_SECONDS = 1.0
# Printed numbers can be longer than a literal may be (2^64*3^20 prints as one integer),
# so re-parsing uses roomier number limits; every other limit stays the default.
REPARSE_LIMITS = ExpressionLimits(max_integer_digits=400)

FAST = settings(
    max_examples=150,
    deadline=None,  # the explicit wall-clock budget below is the real check
    suppress_health_check=[HealthCheck.too_slow],
)


# A generated exponent can still collapse to an unsimple number (u - u + .01 is 1/100);
# these are correct refusals of the limits, not grammar failures.
LIMIT_CODES = {"expression_exponent_too_large", "expression_number_too_large"}


def _parse_generated(text: str) -> Any:
    try:
        return parse_expression(text, NAMESPACE)
    except ExpressionError as err:
        assume(err.code not in LIMIT_CODES)
        raise


def _outcome(call: Any) -> Any:
    """Run ``call``; it must return a sympy object or raise ExpressionError, quickly."""
    start = time.perf_counter()
    try:
        result = call()
    except ExpressionError as err:
        assert err.code, err
        assert isinstance(err.reason, str) and err.reason
        result = err
    elapsed = time.perf_counter() - start
    assert elapsed < CALL_BUDGET_SECONDS, f"took {elapsed:.2f}s"
    return result


def _check_total(text: str) -> None:
    result = _outcome(lambda: parse_expression(text, NAMESPACE))
    if isinstance(result, ExpressionError):
        if result.position is not None:
            assert 0 <= result.position <= len(text)
    else:
        assert isinstance(result, sympy.Basic)
        assert all(s.name.startswith(("_c_", "_p", "_f")) for s in result.free_symbols)
    equation = _outcome(lambda: parse_equation(text, NAMESPACE))
    assert isinstance(equation, ExpressionError | tuple)
    function = _outcome(lambda: parse_time_function(text, {"nu": 0.5}))
    assert isinstance(function, ExpressionError | sympy.Basic)


@FAST
@given(st.text(max_size=200))
def test_any_text_parses_or_raises_expression_error(text: str) -> None:
    _check_total(text)


@FAST
@given(grammar_soup())
def test_grammar_soup_parses_or_raises_expression_error(text: str) -> None:
    _check_total(text)


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(expressions())
def test_generated_expressions_round_trip_through_text(generated: GeneratedExpression) -> None:
    expr = _outcome(lambda: _parse_generated(generated.text))
    printed = to_text(expr, NAMESPACE)
    again = _outcome(lambda: parse_expression(printed, NAMESPACE, REPARSE_LIMITS))
    # Usually the very same tree; sympy distributes a number over a parenthesised sum
    # (t/(2*(t + 1)) re-parses as t/(2*t + 2)), so equality up to expansion is the promise.
    assert again == expr or sympy.expand(again - expr) == 0, (
        f"{generated.text!r} printed as {printed!r}"
    )
    assert isinstance(to_latex(expr, NAMESPACE), str)


def _substitution(point: dict[str, Any]) -> dict[Any, Any]:
    """Internal symbol -> exact value, resolving each name with the parser itself."""
    values = {}
    for name, value in point.items():
        symbol = parse_expression(name, NAMESPACE)
        values[symbol] = sympy.Rational(value.numerator, value.denominator)
    return values


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(expressions())
def test_generated_expressions_match_the_reference_value(generated: GeneratedExpression) -> None:
    expr = _parse_generated(generated.text)
    exact = expr.xreplace(_substitution(generated.point))
    assert not exact.free_symbols, exact
    value = complex(exact.evalf(30))
    assert abs(value.imag) < 1e-12, (generated.text, value)
    # Float rounding grows with the largest intermediate value; precedence mistakes
    # change results by far more than this.
    tolerance = 1e-8 * (1 + generated.scale)
    assert math.isclose(value.real, generated.value, rel_tol=1e-8, abs_tol=tolerance), (
        generated.text,
        value.real,
        generated.value,
    )
