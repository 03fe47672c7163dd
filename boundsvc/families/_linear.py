"""Splitting an equation into the coefficients of chosen derivative symbols."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import sympy

from boundsvc.expr import Namespace


@dataclass(frozen=True)
class AffineSplit:
    """``expr = sum_g coefficient[g] * g + remainder`` with coefficients free of the ``g``."""

    coefficients: dict[sympy.Symbol, sympy.Expr]
    remainder: sympy.Expr


def affine_split(expr: sympy.Expr, gens: Sequence[sympy.Symbol]) -> AffineSplit | str:
    """Coefficients of ``expr`` as an affine function of ``gens``, or why it is not affine."""
    expanded = sympy.expand(expr)
    coefficients: dict[sympy.Symbol, sympy.Expr] = {}
    remainder = sympy.Integer(0)
    for term in sympy.Add.make_args(expanded):
        present = [g for g in gens if term.has(g)]
        if not present:
            remainder += term
            continue
        if len(present) > 1:
            return f"the term {term} multiplies two derivatives"
        g = present[0]
        coeff = (
            sympy.simplify(term / g)
            if not term.is_Mul
            else sympy.Mul(*[f for f in term.args if f != g])
        )
        if coeff.has(g):
            return f"the term {term} is not linear in {g}"
        coefficients[g] = coefficients.get(g, sympy.Integer(0)) + coeff
    return AffineSplit(
        coefficients={g: sympy.expand(c) for g, c in coefficients.items()},
        remainder=sympy.expand(remainder),
    )


def field_symbols(expr: sympy.Expr, ns: Namespace) -> set[sympy.Symbol]:
    """The field symbols (unknowns and their derivatives) of ``ns`` in ``expr``."""
    return {
        s
        for s in expr.free_symbols
        if (info := ns.describe(s)) is not None and info.kind == "field"
    }


def foreign_field_names(
    expr: sympy.Expr, allowed: Iterable[sympy.Symbol], ns: Namespace
) -> list[str]:
    """Sorted user names of the fields in ``expr`` that are not ``allowed`` (for refusals)."""
    return sorted(ns.display_name(s) for s in field_symbols(expr, ns) - set(allowed))


def field_names(expr: sympy.Expr, ns: Namespace) -> list[str]:
    """User names of the field symbols (u, u_x, ...) in ``expr``, sorted."""
    names = []
    for sym in expr.free_symbols:
        info = ns.describe(sym)
        if info is not None and info.kind == "field":
            names.append(info.name)
    return sorted(names)
