"""Safe expression grammar: untrusted text -> sympy expressions, and back.

The package has its own tokeniser and precedence-climbing parser that build sympy
objects directly; user text never reaches ``eval``, ``sympify`` or any sympy function
that parses strings, and internal symbols are never named after user text.  See
``docs/expressions.md`` for the grammar, the limits and the error codes.

Examples
--------
>>> ns = Namespace(coordinates=("t", "x"), unknowns=("u",), parameters=("nu",))
>>> lhs, rhs = parse_equation("u_t = nu*u_xx - u*u_x", ns)
>>> to_text(rhs, ns)
'nu*u_xx - u*u_x'
"""

from boundsvc.expr._errors import ERROR_CODES, ExpressionError, ExpressionErrorCode
from boundsvc.expr._limits import DEFAULT_LIMITS, ExpressionLimits
from boundsvc.expr._namespace import Namespace, SymbolInfo, SymbolKind, time_symbol
from boundsvc.expr._parser import parse_equation, parse_expression, parse_time_function
from boundsvc.expr._printing import to_latex, to_text
from boundsvc.expr._vocabulary import CONSTANTS, COORDINATE_LETTERS, FUNCTIONS

__all__ = [
    "CONSTANTS",
    "COORDINATE_LETTERS",
    "DEFAULT_LIMITS",
    "ERROR_CODES",
    "FUNCTIONS",
    "ExpressionError",
    "ExpressionErrorCode",
    "ExpressionLimits",
    "Namespace",
    "SymbolInfo",
    "SymbolKind",
    "parse_equation",
    "parse_expression",
    "parse_time_function",
    "time_symbol",
    "to_latex",
    "to_text",
]
