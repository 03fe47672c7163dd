"""Precedence-climbing parser: tokens -> sympy objects, built directly (no string eval).

Grammar (``docs/expressions.md`` has the user-facing version)::

    equation   := expression "=" expression
    expression := term (("+" | "-") term)*
    term       := unary (("*" | "/") unary)*
    unary      := ("+" | "-") unary | power
    power      := primary (("^" | "**") unary)?        # right-associative via unary
    primary    := NUMBER | NAME | FUNCTION "(" expression ")" | "(" expression ")"

So ``-x^2`` is ``-(x^2)``, ``2^-1`` is ``2^(-1)``, ``a^b^c`` is ``a^(b^c)`` and ``a/b/c``
is ``(a/b)/c``.  Sums and products are collected into one n-ary ``Add``/``Mul`` (sympy
re-sorts its arguments on every binary ``+``, which would make long sums quadratic).

Recursion depth is bounded by ``limits.max_depth`` (a handful of Python frames per
level), so hostile nesting fails with ``expression_too_deep`` long before Python's
recursion limit.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from fractions import Fraction
from functools import partial
from operator import neg
from typing import Any, NoReturn

import sympy

from boundsvc.expr._errors import ExpressionError, ExpressionErrorCode
from boundsvc.expr._guards import CostGuard
from boundsvc.expr._limits import DEFAULT_LIMITS, ExpressionLimits
from boundsvc.expr._namespace import Namespace
from boundsvc.expr._tokens import Token, tokenize
from boundsvc.expr._vocabulary import CONSTANTS, FUNCTIONS

__all__ = ["parse_equation", "parse_expression", "parse_time_function"]

_TIME_NAMESPACE_COORDINATES = ("t",)


class _Parser:
    """One parse of one text; not reusable."""

    def __init__(
        self,
        text: str,
        namespace: Namespace,
        limits: ExpressionLimits,
        values: Mapping[str, Any] | None = None,
    ) -> None:
        if not isinstance(limits, ExpressionLimits):
            raise ExpressionError("invalid_limits", "limits must be an ExpressionLimits")
        if not isinstance(namespace, Namespace):
            raise ExpressionError("invalid_namespace", "namespace must be a Namespace")
        self._tokens = tokenize(text, limits)
        self._text = text
        self._namespace = namespace
        self._limits = limits
        self._values = values or {}
        self._index = 0
        self._depth = 0
        self._max_order = min(namespace.max_derivative_order, limits.max_derivative_order)
        self._guard = CostGuard(limits, text)

    @property
    def position(self) -> int:
        """Offset of the token being looked at (for errors raised outside the grammar)."""
        return self._peek().position

    # -- token helpers --------------------------------------------------------------
    def _peek(self) -> Token:
        return self._tokens[self._index]

    def _advance(self) -> Token:
        token = self._tokens[self._index]
        if token.kind != "end":
            self._index += 1
        return token

    def _at_op(self, *ops: str) -> bool:
        token = self._peek()
        return token.kind == "op" and token.text in ops

    def _fail(self, code: ExpressionErrorCode, reason: str, token: Token) -> NoReturn:
        raise ExpressionError(code, reason, token.position, self._text)

    def _enter(self, token: Token) -> None:
        self._depth += 1
        if self._depth > self._limits.max_depth:
            self._fail(
                "expression_too_deep",
                f"the expression is nested more than {self._limits.max_depth} levels deep "
                "(parentheses, function calls, signs and exponents each open a level)",
                token,
            )

    def _leave(self) -> None:
        self._depth -= 1

    def _build(self, token: Token, make: Callable[[], Any]) -> Any:
        """Run a sympy constructor, wrap anything it raises, validate what it returns."""
        try:
            node = make()
        except ExpressionError:
            raise
        except Exception as exc:  # sympy raises many types (ValueError, TypeError, ...)
            self._fail(
                "expression_unsupported",
                f"the expression could not be built ({type(exc).__name__}) near {token.describe()}",
                token,
            )
        return self._guard.validated(node, token.position)

    # -- grammar ----------------------------------------------------------------------
    def parse(self, equation: bool) -> tuple[Any, Any | None]:
        lhs = self._expression()
        rhs: Any | None = None
        token = self._peek()
        if token.kind == "equals":
            if not equation:
                self._fail(
                    "expression_unexpected_equation",
                    "found '=' but an expression, not an equation, was expected",
                    token,
                )
            self._advance()
            rhs = self._expression()
            token = self._peek()
            if token.kind == "equals":
                self._fail(
                    "expression_syntax", "an equation has exactly one '='; found another", token
                )
        elif equation and token.kind == "end":
            raise ExpressionError(
                "expression_not_equation",
                "expected an equation 'lhs = rhs' but the text has no '='",
                None,
                self._text,
            )
        if token.kind != "end":
            self._trailing(token)
        return (
            self._guard.validated_tree(lhs),
            None if rhs is None else self._guard.validated_tree(rhs),
        )

    def _trailing(self, token: Token) -> NoReturn:
        if token.kind == "rparen":
            self._fail("expression_syntax", "')' has no matching '('", token)
        if token.kind == "comma":
            self._fail("expression_syntax", "',' is only allowed between function arguments", token)
        self._fail("expression_syntax", f"unexpected {token.describe()}", token)

    def _expression(self) -> Any:
        first = self._peek()
        terms = [self._term()]
        while self._at_op("+", "-"):
            operator = self._advance()
            term = self._term()
            terms.append(
                self._build(operator, partial(neg, term)) if operator.text == "-" else term
            )
        if len(terms) == 1:
            return terms[0]
        return self._build(first, lambda: sympy.Add(*terms))

    def _term(self) -> Any:
        first = self._peek()
        negate = False
        if self._at_op("+", "-"):
            # A leading sign becomes a factor -1 of the whole product instead of being
            # applied to the first factor: -(t+1)/pi is the same number either way, but
            # sympy distributes -1 over a lone sum (-t - 1) and not over a product, so only
            # this form re-parses to_text output to the identical tree.
            sign = self._advance()
            self._enter(sign)
            operand = self._unary()
            self._leave()
            negate = sign.text == "-"
        else:
            operand = self._unary()
        if not self._at_op("*", "/"):
            return self._build(first, partial(neg, operand)) if negate else operand
        factors = [sympy.Integer(-1), operand] if negate else [operand]
        groups: dict[Any, Any] = {}
        self._guard.product(groups, operand, first.position)
        while self._at_op("*", "/"):
            operator = self._advance()
            factor = self._unary()
            if operator.text == "/":
                if factor == 0:
                    self._fail("expression_undefined", "division by zero", operator)
                self._guard.power(factor, sympy.Integer(-1), operator.position)
                factor = self._build(operator, partial(sympy.Pow, factor, -1))
            self._guard.product(groups, factor, operator.position)
            factors.append(factor)
        return self._build(first, lambda: sympy.Mul(*factors))

    def _unary(self) -> Any:
        if self._at_op("+", "-"):
            sign = self._advance()
            self._enter(sign)
            operand = self._unary()
            self._leave()
            if sign.text == "+":
                return operand
            return self._build(sign, partial(neg, operand))
        return self._power()

    def _power(self) -> Any:
        base = self._primary()
        if not self._at_op("^", "**"):
            return base
        operator = self._advance()
        self._enter(operator)
        exponent = self._unary()
        self._leave()
        # Checked before sympy.Pow exists: 9^9^9 must never reach sympy's integer power.
        self._guard.power(base, exponent, operator.position)
        return self._build(operator, lambda: sympy.Pow(base, exponent))

    def _primary(self) -> Any:
        token = self._advance()
        if token.kind == "number":
            assert isinstance(token.value, Fraction)
            value = sympy.Rational(token.value.numerator, token.value.denominator)
        elif token.kind == "name":
            value = self._name(token)
        elif token.kind == "lparen":
            self._enter(token)
            value = self._expression()
            self._close(token, "(")
            self._leave()
            if self._peek().kind == "derivative":
                value = self._total_derivative(value, self._advance())
        else:
            where = "" if token.kind == "end" else " "
            self._fail(
                "expression_syntax",
                f"expected a number, a name or '('{where}but found {token.describe()}",
                token,
            )
        following = self._peek()
        if following.kind in ("number", "name", "lparen"):
            previous = self._tokens[self._index - 1]
            self._fail(
                "expression_missing_operator",
                f"missing operator between {previous.describe()} and {following.describe()} "
                "(implicit multiplication is not supported; write '*' for a product)",
                following,
            )
        return value

    def _total_derivative(self, value: Any, suffix: Token) -> Any:
        """``(expr)_x``: the total derivative by the chain rule, letter by letter.

        D_c e = de/dc + sum over the fields f in e of de/df * f_c, so ``(u^2/2)_x`` is
        ``u*u_x``; every derivative symbol it creates obeys the usual order limit.
        """
        for letter in suffix.text:
            if letter not in self._namespace.coordinates:
                self._fail(
                    "expression_bad_derivative",
                    f"{letter!r} in the derivative suffix '_{suffix.text}' is not a coordinate "
                    "here; the coordinates are " + ", ".join(self._namespace.coordinates),
                    suffix,
                )
            value = self._build(suffix, partial(self._derivative_once, value, letter, suffix))
        return value

    def _derivative_once(self, value: Any, letter: str, suffix: Token) -> Any:
        ns = self._namespace
        result = sympy.diff(value, ns.coordinate(letter))
        for symbol in sorted(value.free_symbols, key=str):
            info = ns.describe(symbol)
            if info is None or info.kind != "field":
                continue
            assert info.unknown is not None
            letters = "".join(info.derivative) + letter
            try:
                derived = ns.lookup(f"{info.unknown}_{letters}", 0, self._max_order)
            except ExpressionError as exc:
                raise ExpressionError(exc.code, exc.reason, suffix.position, self._text) from None
            result += sympy.diff(value, symbol) * derived
        return result

    def _close(self, opening: Token, what: str) -> None:
        token = self._peek()
        if token.kind == "rparen":
            self._advance()
            return
        if token.kind == "comma" and what != "(":
            self._fail("expression_bad_call", f"{what} takes exactly one argument", token)
        self._fail(
            "expression_syntax",
            f"expected ')' to close the '(' at position {opening.position} but found "
            f"{token.describe()}",
            token,
        )

    def _name(self, token: Token) -> Any:
        name = token.text
        if name in FUNCTIONS:
            return self._call(token)
        if token.primes and (name in CONSTANTS or name in self._values):
            self._fail(
                "expression_bad_derivative",
                "a prime (') marks a time derivative and can only follow an unknown",
                token,
            )
        if name in CONSTANTS:
            return CONSTANTS[name]
        if name in self._values:
            return self._values[name]
        try:
            return self._namespace.lookup(name, token.primes, self._max_order)
        except ExpressionError as exc:
            raise ExpressionError(exc.code, exc.reason, token.position, self._text) from None

    def _call(self, token: Token) -> Any:
        name = token.text
        if token.primes:
            self._fail("expression_syntax", f"a function ({name}) cannot have a prime (')", token)
        opening = self._peek()
        if opening.kind != "lparen":
            self._fail(
                "expression_bad_call",
                f"the function {name} must be followed by '(', as in {name}(x)",
                opening,
            )
        self._advance()
        if self._peek().kind == "rparen":
            self._fail("expression_bad_call", f"{name}() needs exactly one argument", self._peek())
        self._enter(opening)
        argument = self._expression()
        self._close(opening, name)
        self._leave()
        if name == "exp":
            self._guard.exp(argument, token.position)
        elif name == "sqrt":
            self._guard.power(argument, sympy.Rational(1, 2), token.position)
        function = FUNCTIONS[name]
        return self._build(token, lambda: function(argument))


def _parse(
    text: str,
    namespace: Namespace,
    limits: ExpressionLimits,
    equation: bool,
    values: Mapping[str, Any] | None = None,
) -> tuple[Any, Any | None]:
    parser = _Parser(text, namespace, limits, values)
    try:
        return parser.parse(equation)
    except ExpressionError:
        raise
    except RecursionError:
        # Unreachable with sane limits (depth is bounded); kept so that a misconfigured
        # ExpressionLimits(max_depth=10**6) still yields the documented error type.
        raise ExpressionError(
            "expression_too_deep", "the expression is nested too deeply", None, text
        ) from None
    except Exception as exc:
        # Constructors are wrapped where they are called; this catches sympy failing
        # inside a cost guard (e.g. while multiplying exponents) so that the promise
        # "every error is an ExpressionError" holds without exception.
        raise ExpressionError(
            "expression_unsupported",
            f"the expression could not be built ({type(exc).__name__})",
            parser.position,
            text,
        ) from None


def parse_expression(
    text: str, namespace: Namespace, limits: ExpressionLimits = DEFAULT_LIMITS
) -> Any:
    """Parse one expression (not an equation) into a sympy expression.

    Parameters
    ----------
    text : str
        Untrusted text, e.g. ``"nu*u_xx - u*u_x"``.
    namespace : Namespace
        Names the text may use.
    limits : ExpressionLimits
        Resource limits.

    Returns
    -------
    sympy.Expr
        Built from the namespace's internal symbols, exact numbers and the grammar's
        functions and constants.

    Raises
    ------
    ExpressionError
        For every problem; ``expression_unexpected_equation`` if the text has ``=``.
    """
    expr, _ = _parse(text, namespace, limits, equation=False)
    return expr


def parse_equation(
    text: str, namespace: Namespace, limits: ExpressionLimits = DEFAULT_LIMITS
) -> tuple[Any, Any]:
    """Parse an equation ``lhs = rhs`` (exactly one ``=``).

    Returns
    -------
    tuple of sympy.Expr
        ``(lhs, rhs)``; the limits apply to the whole text.

    Raises
    ------
    ExpressionError
        For every problem; ``expression_not_equation`` if the text has no ``=``.
    """
    lhs, rhs = _parse(text, namespace, limits, equation=True)
    assert rhs is not None
    return lhs, rhs


def _exact(name: str, value: Any) -> Any:
    if isinstance(value, bool) or not isinstance(value, int | float | Fraction):
        raise ExpressionError(
            "invalid_parameter_value",
            f"parameter {name!r} must be a real number, got {type(value).__name__}",
        )
    if isinstance(value, float):
        if value != value or value in (float("inf"), float("-inf")):
            raise ExpressionError(
                "invalid_parameter_value", f"parameter {name!r} must be finite, got {value!r}"
            )
        # repr() is the shortest decimal that round-trips, i.e. what the client wrote
        # in JSON: 0.1 becomes 1/10, not 3602879701896397/36028797018963968.
        value = Fraction(repr(value))
    exact = Fraction(value)
    return sympy.Rational(exact.numerator, exact.denominator)


def parse_time_function(
    text: str,
    parameters: Mapping[str, float] | None = None,
    limits: ExpressionLimits = DEFAULT_LIMITS,
) -> Any:
    """Parse a function of time only, such as ``"2/(1.25 - t)"``.

    Parameters
    ----------
    text : str
        Untrusted text; may use ``t``, the given parameters, functions and constants,
        but no unknowns.
    parameters : mapping of str to float, optional
        Parameter values, substituted exactly while parsing (a float is taken as its
        shortest decimal representation, so ``0.1`` is exactly ``1/10``).  Substituting
        during parsing, not afterwards, keeps the cost guards effective.
    limits : ExpressionLimits
        Resource limits.

    Returns
    -------
    sympy.Expr
        An expression whose only free symbol (if any) is the coordinate ``t`` of
        ``Namespace(coordinates=("t",))``, i.e. ``Symbol("_c_t", real=True)``.

    Raises
    ------
    ExpressionError
        For every problem, including ``invalid_parameter_name`` and
        ``invalid_parameter_value``.
    """
    given = dict(parameters or {})
    namespace = Namespace(
        coordinates=_TIME_NAMESPACE_COORDINATES, unknowns=(), parameters=tuple(given)
    )
    values = {name: _exact(name, value) for name, value in given.items()}
    expr, _ = _parse(text, namespace, limits, equation=False, values=values)
    return expr
