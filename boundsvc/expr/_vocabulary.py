"""The fixed words of the grammar: functions, constants, coordinate letters, Greek names."""

from __future__ import annotations

from collections.abc import Callable
from types import MappingProxyType
from typing import Any

import sympy

__all__ = [
    "CONSTANTS",
    "COORDINATE_LETTERS",
    "FUNCTIONS",
    "GREEK_LATEX",
    "NAME_HINTS",
    "RESERVED_WORDS",
]

COORDINATE_LETTERS: tuple[str, ...] = ("t", "x", "y", "z")
"""All coordinates a namespace may use, in canonical derivative order (time first)."""

FUNCTIONS: MappingProxyType[str, Callable[[Any], Any]] = MappingProxyType(
    {
        "sin": sympy.sin,
        "cos": sympy.cos,
        "tan": sympy.tan,
        "exp": sympy.exp,
        "log": sympy.log,  # natural logarithm
        "sqrt": sympy.sqrt,
        "tanh": sympy.tanh,
        "sinh": sympy.sinh,
        "cosh": sympy.cosh,
        "abs": sympy.Abs,
    }
)
"""Functions of exactly one argument, by the name users write."""

CONSTANTS: MappingProxyType[str, Any] = MappingProxyType({"pi": sympy.pi, "E": sympy.E})
"""Named constants, by the name users write."""

RESERVED_WORDS: frozenset[str] = frozenset(FUNCTIONS) | frozenset(CONSTANTS)
"""Words no unknown or parameter may be called (coordinates are reserved per namespace)."""

NAME_HINTS: MappingProxyType[str, str] = MappingProxyType(
    {
        "e": "Euler's number is written E",
        "ln": "the natural logarithm is written log",
        "Abs": "the absolute value is written abs",
        "PI": "pi is written in lower case",
        "Pi": "pi is written in lower case",
        "pow": "powers are written x^2 or x**2",
        "i": "complex numbers are not supported",
        "I": "complex numbers are not supported",
        "inf": "infinity is not a number in this grammar",
        "oo": "infinity is not a number in this grammar",
        "asin": "only sin cos tan exp log sqrt tanh sinh cosh abs are available",
        "acos": "only sin cos tan exp log sqrt tanh sinh cosh abs are available",
        "atan": "only sin cos tan exp log sqrt tanh sinh cosh abs are available",
    }
)
"""Extra advice for names users commonly try; shown in ``expression_unknown_name``."""

_GREEK = (
    "alpha beta gamma delta epsilon varepsilon zeta eta theta vartheta iota kappa lambda mu "
    "nu xi rho varrho sigma varsigma tau upsilon phi varphi chi psi omega "
    "Gamma Delta Theta Lambda Xi Pi Sigma Upsilon Phi Psi Omega"
)
GREEK_LATEX: MappingProxyType[str, str] = MappingProxyType(
    {name: "\\" + name for name in _GREEK.split()}
)
"""Greek letter names (as users spell them) to LaTeX macros, e.g. ``nu`` -> ``\\nu``."""
