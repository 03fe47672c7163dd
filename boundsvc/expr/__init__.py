"""The safe expression grammar: text -> sympy expression, with our own parser and size limits.

Nothing here evaluates text: a tokeniser and a precedence-climbing parser build sympy objects
directly, in internal symbols whose names never come from the request. See
``docs/expressions.md``.
"""

from boundsvc.expr._grammar import (
    DEFAULT_LIMITS,
    ExpressionError,
    ExpressionErrorCode,
    ExpressionLimits,
    Namespace,
    SymbolInfo,
    parse_equation,
    parse_expression,
    parse_time_function,
    time_symbol,
    to_latex,
    to_text,
)

__all__ = [
    "DEFAULT_LIMITS",
    "ExpressionError",
    "ExpressionErrorCode",
    "ExpressionLimits",
    "Namespace",
    "SymbolInfo",
    "parse_equation",
    "parse_expression",
    "parse_time_function",
    "time_symbol",
    "to_latex",
    "to_text",
]
