"""Resource limits that keep parsing an untrusted expression cheap."""

from __future__ import annotations

from dataclasses import dataclass, fields

from boundsvc.expr._errors import ExpressionError

__all__ = ["DEFAULT_LIMITS", "ExpressionLimits"]


@dataclass(frozen=True, slots=True)
class ExpressionLimits:
    """Limits applied while parsing one text (an equation counts as one text).

    Every limit is checked before the work it protects is done, so an input that
    breaks a limit costs at most a linear scan of ``max_length`` characters.

    Parameters
    ----------
    max_length : int, default 2000
        Maximum number of characters; checked before anything else.
    max_depth : int, default 48
        Maximum nesting depth.  Every parenthesis, function call, unary sign and
        exponent opens one level.  The parser stops at this depth, so even 10⁴ nested
        parentheses fail fast and never reach Python's recursion limit.
    max_nodes : int, default 1500
        Maximum number of tokens (numbers, names, operators, parentheses); the tree
        built from the tokens has at most this many nodes.
    max_exponent : int, default 64
        A numeric exponent ``e`` must be an integer or a rational ``p/q`` with
        ``|e| <= max_exponent`` and ``q <= max_exponent``.  It is checked before sympy
        builds the power, and again on the power sympy builds (``(x^8)^16`` is
        ``x^128``).  Symbolic exponents such as ``x^t`` are allowed.
    max_integer_digits : int, default 40
        A number literal, written out in full, may have at most this many digits before
        the decimal point and at most this many after it (``1e40`` is fine, ``1e41``
        is not).  Exact numeric powers may reach ``max_integer_digits * max_exponent``
        digits (2560 by default): ``(2^64)^64`` is fine, ``((2^64)^64)^64`` is not.
    max_derivative_order : int, default 4
        Maximum total order of a derivative such as ``u_xxt``; the smaller of this and
        the namespace's own ``max_derivative_order`` applies.
    max_radical_digits : int, default 24
        A non-integer power of a number (``sqrt(2)``, ``7^(1/3)``) stays exact, and sympy
        factorises the number to simplify it, which is slow for large prime factors.
        The digits of the numbers under such powers, after removing prime factors below
        100, may total at most this many per text (``sqrt(1e-8)`` counts 0 digits,
        ``sqrt(999983)`` counts 6).
    """

    max_length: int = 2000
    max_depth: int = 48
    max_nodes: int = 1500
    max_exponent: int = 64
    max_integer_digits: int = 40
    max_derivative_order: int = 4
    max_radical_digits: int = 24

    def __post_init__(self) -> None:
        for spec in fields(self):
            value = getattr(self, spec.name)
            # bool is an int subclass; True as a limit is surely a mistake.
            if not isinstance(value, int) or isinstance(value, bool):
                raise ExpressionError(
                    "invalid_limits", f"limit {spec.name} must be an integer, got {value!r}"
                )
            minimum = 0 if spec.name in ("max_derivative_order", "max_radical_digits") else 1
            if value < minimum:
                raise ExpressionError(
                    "invalid_limits", f"limit {spec.name} must be at least {minimum}, got {value}"
                )

    @property
    def max_power_digits(self) -> int:
        """Maximum number of digits of an exact numeric power (derived limit)."""
        return self.max_integer_digits * self.max_exponent


DEFAULT_LIMITS = ExpressionLimits()
"""The limits used by the HTTP API unless a route says otherwise."""
