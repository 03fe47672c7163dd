"""Cost guards: refuse operations before sympy's automatic evaluation makes them expensive.

sympy evaluates eagerly.  ``Pow(9, 387420489)`` computes a 370-million-digit integer,
``exp(10**40*log(2))`` becomes ``2**(10**40)``, ``(2**x)**(10**40/x)`` combines into the
same power, and a non-integer power of a number (``n**(1/3)``) factorises ``n``, which
takes seconds for a 40-digit ``n`` with large prime factors.  None of these can be
interrupted once started, so the parser asks a :class:`CostGuard` *before* it builds
each power, product and ``exp`` call, and validates every node it has built.

The checks follow what sympy would do (combine ``(b**e1)**e2``, distribute a power over
a product, turn ``exp(c*log(a))`` into ``a**c``) and err on the side of refusing.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import sympy

from boundsvc.expr._errors import ExpressionError
from boundsvc.expr._limits import ExpressionLimits

__all__ = ["CostGuard", "decimal_digits", "power_groups"]

# fmt: off
_SMALL_PRIMES = (
    2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47, 53, 59, 61, 67, 71, 73, 79, 83, 89, 97,
)
# fmt: on
_UNDEFINED = (sympy.zoo, sympy.nan, sympy.oo, -sympy.oo)
_LOG10_2 = 0.30102999566398120


def decimal_digits(number: int) -> int:
    """Upper bound on the decimal digits of ``|number|`` (no str(): it is capped at 4300)."""
    return int(abs(number).bit_length() * _LOG10_2) + 1


def _rough_part(number: int) -> int:
    """``|number|`` with every prime factor below 100 divided out."""
    number = abs(number)
    for prime in _SMALL_PRIMES:
        if number < prime:
            break
        while number % prime == 0:
            number //= prime
    return number


def _show(number: Any) -> str:
    """A number for an error message; huge numbers are described, not printed."""
    if number.is_Rational and max(decimal_digits(number.p), decimal_digits(number.q)) > 12:
        return f"a number with about {decimal_digits(number.p)} digits"
    return str(number)


def power_groups(factors: Iterable[Any]) -> list[tuple[Any, Any]]:
    """Split product factors into ``(base, exponent)`` pairs the way ``Mul`` groups them.

    ``exp(a)`` and ``E`` count as powers of ``E``; plain numbers are coefficients and
    are left out (sympy multiplies them, it does not combine them into powers).
    """
    pairs: list[tuple[Any, Any]] = []
    for factor in factors:
        for item in sympy.Mul.make_args(factor):
            if item.is_Rational:
                continue
            if isinstance(item, sympy.exp):
                pairs.append((sympy.E, item.args[0]))
            elif item.is_Pow:
                pairs.append((item.base, item.exp))
            else:
                pairs.append((item, sympy.Integer(1)))
    return pairs


def _numbers_outside_logs(expr: Any) -> set[Any]:
    """Rational atoms of ``expr`` that are not inside a ``log`` (the would-be exponents)."""
    found: set[Any] = set()
    stack = [expr]
    while stack:  # iterative: no recursion on user-shaped trees
        node = stack.pop()
        if node.is_Rational:
            found.add(node)
        elif not isinstance(node, sympy.log):
            stack.extend(node.args)
    return found


class CostGuard:
    """Per-text state and checks that keep sympy's automatic evaluation cheap.

    Parameters
    ----------
    limits : ExpressionLimits
        ``max_exponent``, ``max_power_digits`` and ``max_radical_digits`` apply.
    text : str
        Source text, attached to the errors.

    Notes
    -----
    Two exponent bounds apply: an exponent the user wrote must satisfy
    ``|e| <= max_exponent`` and have a denominator ``<= max_exponent``; an exponent
    that sympy forms by combining powers (``(x^64)^64``, ``exp(100*log(2))``) may reach
    ``max_exponent**2``.  The numbers under non-integer powers are charged once each
    against ``max_radical_digits`` because sympy caches their factorisations.
    """

    def __init__(self, limits: ExpressionLimits, text: str) -> None:
        self._limits = limits
        self._text = text
        self._radical_digits = 0
        self._charged: set[int] = set()

    def _error(self, code: Any, reason: str, position: int | None) -> ExpressionError:
        return ExpressionError(code, reason, position, self._text)

    # -- powers ---------------------------------------------------------------------
    def power(self, base: Any, exponent: Any, position: int, *, written: bool = True) -> None:
        """Check ``base ** exponent`` and every power sympy would derive from it.

        Raises
        ------
        ExpressionError
            ``expression_exponent_too_large`` or ``expression_number_too_large``.
        """
        if exponent.is_Number:
            self._numeric_exponent(base, exponent, position, written=written)
        # Mirror sympy's rewrites of the new power, recursively.
        if base == sympy.E:
            self.exp(exponent, position)
        elif isinstance(base, sympy.exp):
            self.exp(base.args[0] * exponent, position)
        elif base.is_Pow:
            self.power(base.base, base.exp * exponent, position, written=False)
        elif base.is_Mul:
            for factor in base.args:
                self.power(factor, exponent, position, written=False)
        elif isinstance(base, sympy.Abs):
            self.power(base.args[0], exponent, position, written=False)

    def _numeric_exponent(self, base: Any, exponent: Any, position: int, *, written: bool) -> None:
        limits = self._limits
        if not exponent.is_Rational:
            # Only exact numbers are ever built; a float here would be a bug upstream.
            raise self._error("expression_unsupported", "inexact exponent", position)
        bound = limits.max_exponent if written else limits.max_exponent**2
        if abs(exponent) > bound or exponent.q > bound:
            what = "an exponent" if written else "the exponent formed by combining powers"
            raise self._error(
                "expression_exponent_too_large",
                f"{what} is {_show(exponent)}; a numeric exponent must be an integer or a "
                f"fraction p/q with |p/q| <= {bound} and q <= {bound}",
                position,
            )
        magnitude = max(1, -(-abs(exponent.p) // exponent.q))  # ceil(|exponent|)
        numbers = base.atoms(sympy.Rational)
        if not numbers:
            return
        digits = max(max(decimal_digits(n.p), decimal_digits(n.q)) for n in numbers)
        if digits * magnitude > limits.max_power_digits:
            raise self._error(
                "expression_number_too_large",
                f"this power would create a number with about {digits * magnitude} digits; "
                f"at most {limits.max_power_digits} are allowed",
                position,
            )
        if exponent.q != 1:
            self._radical(numbers, position)

    def _radical(self, numbers: Iterable[Any], position: int) -> None:
        for number in numbers:
            for part in (number.p, number.q):
                rough = _rough_part(part)
                if rough == 1 or rough in self._charged:
                    continue
                self._charged.add(rough)
                self._radical_digits += decimal_digits(rough)
        if self._radical_digits > self._limits.max_radical_digits:
            raise self._error(
                "expression_number_too_large",
                "the numbers under non-integer powers (such as sqrt(n) or n^(1/3)) have "
                f"{self._radical_digits} digits apart from prime factors below 100; at most "
                f"{self._limits.max_radical_digits} are allowed",
                position,
            )

    # -- exp ------------------------------------------------------------------------
    def exp(self, argument: Any, position: int) -> None:
        """Check ``exp(argument)``: sympy turns ``exp(c*log(a))`` into ``a**c``.

        Every additive term of the argument that contains a ``log`` is treated as if
        each logarithm's argument were raised to every number in the term (sympy also
        runs ``logcombine``, so ``exp(c*(log(a) + log(b)))`` becomes ``(a*b)**c``).
        """
        for term in sympy.Add.make_args(argument):
            logs = term.atoms(sympy.log)
            if not logs:
                continue
            numbers = _numbers_outside_logs(term)
            if not numbers:
                continue
            largest = max(numbers, key=abs)
            fractions = [n for n in numbers if n.q != 1]
            for log_term in logs:
                inner = log_term.args[0]
                self.power(inner, abs(largest), position, written=False)
                if fractions:
                    self.power(inner, abs(fractions[0]), position, written=False)

    # -- products -------------------------------------------------------------------
    def product(self, groups: dict[Any, Any], factor: Any, position: int) -> None:
        """Check the powers ``Mul`` would combine when ``factor`` joins a product.

        ``groups`` maps each base seen so far in this product to its summed exponent
        and is updated in place.
        """
        for base, exponent in power_groups([factor]):
            if base in groups:
                combined = groups[base] + exponent
                groups[base] = combined
                if base == sympy.E:
                    self.exp(combined, position)
                else:
                    self.power(base, combined, position, written=False)
            else:
                groups[base] = exponent

    # -- results --------------------------------------------------------------------
    def validated(self, node: Any, position: int | None) -> Any:
        """Return ``node`` after checking what building it may have introduced.

        New atoms appear at the top of the node sympy returns, so the node and its direct
        arguments are inspected: undefined values (``1/0``, ``log(0)``, ``tan(pi/2)``),
        the imaginary unit (``sqrt(-1)``), oversized numbers and combined exponents.
        """
        for item in (node, *node.args):
            if any(item == bad for bad in _UNDEFINED):
                raise self._error(
                    "expression_undefined",
                    "the expression is undefined here (a division by zero or a pole such as "
                    "log(0) or tan(pi/2))",
                    position,
                )
            if item == sympy.I:
                raise self._error(
                    "expression_not_real",
                    "the expression is not real here (for example the square root of a "
                    "negative number)",
                    position,
                )
            if item.is_Rational:
                digits = max(decimal_digits(item.p), decimal_digits(item.q))
                if digits > self._limits.max_power_digits:
                    raise self._error(
                        "expression_number_too_large",
                        f"the expression contains a number with about {digits} digits; at "
                        f"most {self._limits.max_power_digits} are allowed",
                        position,
                    )
            elif item.is_Pow and item.exp.is_Number:
                if item.base.is_Number and item.base.is_negative and item.exp.q != 1:
                    raise self._error(
                        "expression_not_real",
                        "a negative number to a non-integer power is not real (sympy takes the "
                        "principal complex root: (-8)^(1/3) is not -2)",
                        position,
                    )
                self._numeric_exponent(item.base, item.exp, position or 0, written=False)
        return node

    def validated_tree(self, node: Any) -> Any:
        """Final check of a whole tree (safety net; errors carry no position)."""
        if node.has(*_UNDEFINED):
            raise self._error(
                "expression_undefined", "the expression is undefined (division by zero)", None
            )
        if node.has(sympy.I):
            raise self._error("expression_not_real", "the expression is not real", None)
        return node
