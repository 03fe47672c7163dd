"""Render expressions with the user's names, as grammar text or as LaTeX.

Internal symbols (``_f0_xx``) sort differently from the names users read (``u_xx``), so
before printing, each internal symbol is replaced by a display symbol
``Symbol("_d_" + display_name)`` that sorts like the user's name; the printers then
map display symbols to names through a table built here, so no printed name ever
depends on how sympy spells a symbol.  Display symbols exist only inside this module.
"""

from __future__ import annotations

from typing import Any

import sympy
from sympy.printing.str import StrPrinter

from boundsvc.expr._errors import ExpressionError
from boundsvc.expr._namespace import Namespace

__all__ = ["to_latex", "to_text"]


class _TextPrinter(StrPrinter):
    """``sympy.sstr`` with the user's names and the grammar's spelling of ``abs``.

    sympy's string printer uses Python precedence, which is the grammar's (``**`` binds
    tighter than unary minus, ``*`` and ``/`` are left-associative), so its output
    re-parses to the same expression.
    """

    def __init__(self, names: dict[Any, str]) -> None:
        super().__init__()
        self._names = names

    def _print_Symbol(self, expr: Any) -> str:  # noqa: N802  (sympy's hook name)
        return self._names[expr]

    def _print_Abs(self, expr: Any) -> str:  # noqa: N802
        return f"abs({self._print(expr.args[0])})"


def _displayed(expr: Any, namespace: Namespace, latex: bool) -> tuple[Any, dict[Any, str]]:
    """``expr`` with display symbols, and the display symbol -> printed name table."""
    if not isinstance(expr, sympy.Basic):
        raise ExpressionError(
            "expression_unsupported", f"expected a sympy expression, got {type(expr).__name__}"
        )
    replacements: dict[Any, Any] = {}
    names: dict[Any, str] = {}
    for symbol in expr.free_symbols:
        info = namespace.info(symbol)  # refuses foreign symbols
        display = sympy.Symbol("_d_" + info.name, real=True)
        replacements[symbol] = display
        names[display] = namespace.latex_name(symbol) if latex else info.name
    try:
        return expr.xreplace(replacements), names
    except Exception as exc:
        raise ExpressionError(
            "expression_unsupported", f"the expression cannot be printed ({type(exc).__name__})"
        ) from None


def to_text(expr: Any, namespace: Namespace) -> str:
    """Render ``expr`` in the expression grammar, with the user's names.

    Parameters
    ----------
    expr : sympy.Expr
        Built from ``namespace``'s symbols (e.g. by :func:`parse_expression`).
    namespace : Namespace

    Returns
    -------
    str
        Text such as ``"nu*u_xx - u*u_x^2"`` (powers as ``^``).  It re-parses to an
        equal expression (usually the identical tree; sympy distributes a number over a
        parenthesised sum, so ``t/(2*(t + 1))`` returns as ``t/(2*t + 2)``) whenever
        ``expr`` only uses the grammar's operations and its numbers fit the limits.

    Raises
    ------
    ExpressionError
        ``expression_foreign_symbol`` if ``expr`` has a symbol not from ``namespace``;
        ``expression_unsupported`` if it is not a sympy object or cannot be printed.
    """
    displayed, names = _displayed(expr, namespace, latex=False)
    try:
        # sympy prints powers as '**'; users mostly write '^'.  Replacing is safe because
        # '**' can only be the operator: names are identifiers and numbers are digits.
        text: str = _TextPrinter(names).doprint(displayed).replace("**", "^")
    except Exception as exc:  # e.g. str() of an integer beyond Python's digit limit
        raise ExpressionError(
            "expression_unsupported", f"the expression cannot be printed ({type(exc).__name__})"
        ) from None
    return text


def to_latex(expr: Any, namespace: Namespace) -> str:
    """Render ``expr`` as LaTeX with the user's names (``\\nu u_{xx} - u u_{x}``).

    Raises
    ------
    ExpressionError
        As :func:`to_text`.
    """
    displayed, names = _displayed(expr, namespace, latex=True)
    try:
        latex: str = sympy.latex(displayed, symbol_names=names)
    except Exception as exc:
        raise ExpressionError(
            "expression_unsupported", f"the expression cannot be printed ({type(exc).__name__})"
        ) from None
    return latex
