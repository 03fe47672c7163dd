"""Our own grammar: text -> sympy expression, built directly (no eval, no sympify)."""

from __future__ import annotations

import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Literal

import sympy

ExpressionErrorCode = Literal[
    "expression_syntax",
    "expression_unknown_name",
    "expression_too_long",
    "expression_too_deep",
    "expression_too_large",
    "expression_exponent_too_large",
    "expression_number_too_large",
    "expression_bad_character",
    "expression_bad_derivative",
    "expression_not_equation",
    "invalid_parameter_name",
]


class ExpressionError(ValueError):
    """Text that is not an allowed expression. Becomes HTTP 422 with ``code``."""

    def __init__(
        self,
        code: ExpressionErrorCode,
        reason: str,
        position: int | None = None,
        text: str | None = None,
    ) -> None:
        super().__init__(reason if position is None else f"{reason} at position {position}")
        self.code = code
        self.reason = reason
        self.position = position
        self.text = text


@dataclass(frozen=True)
class ExpressionLimits:
    """Size limits checked before and while parsing."""

    max_length: int = 2000
    max_depth: int = 48
    max_nodes: int = 1500
    max_exponent: int = 64
    max_integer_digits: int = 40
    max_derivative_order: int = 4


DEFAULT_LIMITS = ExpressionLimits()

FUNCTIONS: Mapping[str, Callable[[sympy.Expr], sympy.Expr]] = {
    "sin": sympy.sin,
    "cos": sympy.cos,
    "tan": sympy.tan,
    "exp": sympy.exp,
    "log": sympy.log,
    "sqrt": sympy.sqrt,
    "tanh": sympy.tanh,
    "sinh": sympy.sinh,
    "cosh": sympy.cosh,
    "abs": sympy.Abs,
}
CONSTANTS: Mapping[str, sympy.Expr] = {"pi": sympy.pi, "E": sympy.E}
COORDINATE_NAMES = ("t", "x", "y", "z")
_IDENT = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")
_GREEK = {
    "alpha",
    "beta",
    "gamma",
    "delta",
    "epsilon",
    "zeta",
    "eta",
    "theta",
    "iota",
    "kappa",
    "lambda",
    "mu",
    "nu",
    "xi",
    "rho",
    "sigma",
    "tau",
    "phi",
    "chi",
    "psi",
    "omega",
    "Gamma",
    "Delta",
    "Theta",
    "Lambda",
    "Xi",
    "Sigma",
    "Phi",
    "Psi",
    "Omega",
}


@dataclass(frozen=True)
class SymbolInfo:
    """What an internal symbol stands for."""

    kind: Literal["coordinate", "parameter", "field"]
    name: str
    unknown: str | None = None
    derivative: tuple[str, ...] = ()

    @property
    def order(self) -> int:
        return len(self.derivative)


_COORD_SYMBOLS = {c: sympy.Symbol(f"_c_{c}", real=True) for c in COORDINATE_NAMES}


def time_symbol() -> sympy.Symbol:
    """Our internal symbol for time (the same object in every namespace)."""
    return _COORD_SYMBOLS["t"]


def _canonical(letters: Sequence[str]) -> tuple[str, ...]:
    return tuple(sorted(letters, key=COORDINATE_NAMES.index))


class Namespace:
    """The names an expression may use, and our internal symbols for them."""

    def __init__(
        self,
        coordinates: Sequence[str] = ("t", "x"),
        unknowns: Sequence[str] = ("u",),
        parameters: Sequence[str] = (),
        max_derivative_order: int = 4,
    ) -> None:
        for c in coordinates:
            if c not in COORDINATE_NAMES:
                raise ExpressionError("invalid_parameter_name", f"{c!r} is not a coordinate")
        self.coordinates = tuple(coordinates)
        self.unknowns = tuple(unknowns)
        self.max_derivative_order = max_derivative_order
        reserved = set(FUNCTIONS) | set(CONSTANTS) | set(COORDINATE_NAMES)
        for u in self.unknowns:
            if not _IDENT.match(u) or u in reserved or "_" in u:
                raise ExpressionError(
                    "invalid_parameter_name",
                    f"{u!r} cannot name an unknown (letters and digits, not a reserved name)",
                )
        self.parameters = tuple(parameters)
        self._params: dict[str, sympy.Symbol] = {}
        for i, p in enumerate(self.parameters):
            if not isinstance(p, str) or not _IDENT.match(p) or len(p) > 40:
                raise ExpressionError(
                    "invalid_parameter_name",
                    f"parameter name {p!r} must be a letter followed by "
                    "letters, digits or '_' (at most 40)",
                )
            if (
                p in reserved
                or p in self.unknowns
                or any(p.startswith(u + "_") for u in self.unknowns)
            ):
                raise ExpressionError(
                    "invalid_parameter_name",
                    f"parameter name {p!r} is reserved (a function, constant, "
                    "coordinate, unknown or derivative)",
                )
            self._params[p] = sympy.Symbol(f"_p{i}", real=True)
        self._fields: dict[tuple[str, tuple[str, ...]], sympy.Symbol] = {}
        self._info: dict[sympy.Symbol, SymbolInfo] = {}
        for c in self.coordinates:
            self._info[_COORD_SYMBOLS[c]] = SymbolInfo("coordinate", c)
        for p, s in self._params.items():
            self._info[s] = SymbolInfo("parameter", p)

    def coordinate(self, name: str) -> sympy.Symbol:
        return _COORD_SYMBOLS[name]

    def parameter(self, name: str) -> sympy.Symbol:
        return self._params[name]

    def field(self, unknown: str, derivative: Sequence[str] = ()) -> sympy.Symbol:
        index = self.unknowns.index(unknown)
        canon = _canonical(derivative)
        key = (unknown, canon)
        if key not in self._fields:
            sym = sympy.Symbol(f"_f{index}_{''.join(canon)}", real=True)
            self._fields[key] = sym
            name = unknown + ("_" + "".join(canon) if canon else "")
            self._info[sym] = SymbolInfo("field", name, unknown, canon)
        return self._fields[key]

    def describe(self, symbol: sympy.Basic) -> SymbolInfo | None:
        if isinstance(symbol, sympy.Symbol) and symbol not in self._info:
            m = re.fullmatch(r"_f(\d+)_([txyz]*)", symbol.name)
            if m and int(m.group(1)) < len(self.unknowns):
                return self._info[self.field(self.unknowns[int(m.group(1))], tuple(m.group(2)))]
        return self._info.get(symbol)

    def display_name(self, symbol: sympy.Basic) -> str:
        info = self.describe(symbol)
        return info.name if info is not None else str(symbol)

    def latex_name(self, symbol: sympy.Basic) -> str:
        info = self.describe(symbol)
        if info is None:
            return str(symbol)
        if info.kind == "field":
            base = info.unknown or "u"
            base_tex = f"\\{base}" if base in _GREEK else base
            return f"{base_tex}_{{{''.join(info.derivative)}}}" if info.derivative else base_tex
        if info.kind == "parameter":
            if info.name in _GREEK:
                return f"\\{info.name}"
            if "_" in info.name:
                head, _, tail = info.name.partition("_")
                head_tex = (
                    f"\\{head}"
                    if head in _GREEK
                    else (head if len(head) == 1 else f"\\mathrm{{{head}}}")
                )
                return f"{head_tex}_{{\\mathrm{{{tail}}}}}"
            return info.name if len(info.name) == 1 else f"\\mathrm{{{info.name}}}"
        return info.name

    def symbol_for_name(
        self, name: str, position: int, text: str, limits: ExpressionLimits
    ) -> sympy.Expr:
        if name in CONSTANTS:
            return CONSTANTS[name]
        if name in self.coordinates:
            return _COORD_SYMBOLS[name]
        if name in self._params:
            return self._params[name]
        if name in self.unknowns:
            return self.field(name)
        head, sep, tail = name.partition("_")
        if sep and head in self.unknowns:
            letters = tuple(tail)
            if not tail or any(ch not in self.coordinates for ch in letters):
                allowed = ", ".join(self.coordinates)
                raise ExpressionError(
                    "expression_bad_derivative",
                    f"{name!r}: derivative letters must be coordinates of this problem ({allowed})",
                    position,
                    text,
                )
            if len(letters) > min(self.max_derivative_order, limits.max_derivative_order):
                raise ExpressionError(
                    "expression_bad_derivative",
                    f"{name!r}: derivatives of order above "
                    f"{min(self.max_derivative_order, limits.max_derivative_order)}"
                    " are not supported",
                    position,
                    text,
                )
            return self.field(head, letters)
        if name in COORDINATE_NAMES:
            raise ExpressionError(
                "expression_unknown_name",
                f"coordinate {name!r} is not an axis of this problem",
                position,
                text,
            )
        if name in FUNCTIONS:
            raise ExpressionError(
                "expression_syntax",
                f"function {name!r} needs an argument in parentheses",
                position,
                text,
            )
        raise ExpressionError(
            "expression_unknown_name",
            f"unknown name {name!r}: declare it as a parameter",
            position,
            text,
        )


# ---------------------------------------------------------------------------------- tokens
@dataclass(frozen=True)
class Token:
    kind: str  # num, name, op, lpar, rpar, eq, prime, end
    text: str
    pos: int


_OPS = {"+", "-", "*", "/", "^"}


def tokenize(text: str, limits: ExpressionLimits) -> list[Token]:
    if len(text) > limits.max_length:
        raise ExpressionError(
            "expression_too_long",
            f"the expression has {len(text)} characters; at most {limits.max_length} are allowed",
            limits.max_length,
            None,
        )
    tokens: list[Token] = []
    i, n = 0, len(text)
    while i < n:
        ch = text[i]
        if ch in " \t":
            i += 1
            continue
        if not (32 <= ord(ch) < 127):
            raise ExpressionError(
                "expression_bad_character",
                f"character U+{ord(ch):04X} is not allowed (ASCII only)",
                i,
                text,
            )
        if ch.isdigit() or (ch == "." and i + 1 < n and text[i + 1].isdigit()):
            m = re.compile(r"(\d*\.?\d*)([eE][+-]?\d+)?").match(text, i)
            assert m is not None
            lit = m.group(0)
            mant = m.group(1).replace(".", "")
            if len(mant.lstrip("0")) > limits.max_integer_digits:
                raise ExpressionError(
                    "expression_number_too_large",
                    f"a number with more than {limits.max_integer_digits} digits",
                    i,
                    text,
                )
            if m.group(2) and abs(int(m.group(2)[1:])) > 300:
                raise ExpressionError(
                    "expression_number_too_large",
                    "an exponent above 300 in a number literal",
                    i,
                    text,
                )
            tokens.append(Token("num", lit, i))
            i += len(lit)
            continue
        if ch.isalpha():
            m = re.compile(r"[A-Za-z][A-Za-z0-9_]*").match(text, i)
            assert m is not None
            tokens.append(Token("name", m.group(0), i))
            i += len(m.group(0))
            continue
        if ch == "*" and text.startswith("**", i):
            tokens.append(Token("op", "^", i))
            i += 2
            continue
        if ch in _OPS:
            tokens.append(Token("op", ch, i))
        elif ch == "(":
            tokens.append(Token("lpar", ch, i))
        elif ch == ")":
            tokens.append(Token("rpar", ch, i))
        elif ch == "=":
            if text.startswith("==", i):
                raise ExpressionError(
                    "expression_syntax",
                    "'==' is not allowed; write one '=' between the two sides",
                    i,
                    text,
                )
            tokens.append(Token("eq", ch, i))
        elif ch == "'":
            tokens.append(Token("prime", ch, i))
        else:
            raise ExpressionError(
                "expression_bad_character", f"character {ch!r} is not allowed", i, text
            )
        i += 1
        if len(tokens) > limits.max_nodes:
            raise ExpressionError(
                "expression_too_large", f"more than {limits.max_nodes} tokens", i, text
            )
    if len(tokens) > limits.max_nodes:
        raise ExpressionError(
            "expression_too_large", f"more than {limits.max_nodes} tokens", None, text
        )
    tokens.append(Token("end", "", n))
    return tokens


def _number(tok: Token, text: str) -> sympy.Expr:
    try:
        frac = Fraction(tok.text)
    except (ValueError, ZeroDivisionError) as exc:
        raise ExpressionError(
            "expression_syntax", f"malformed number {tok.text!r}", tok.pos, text
        ) from exc
    return sympy.Rational(frac.numerator, frac.denominator)


class _Parser:
    """Precedence climbing: expr := term (('+'|'-') term)*; term := unary (('*'|'/') unary)*;
    unary := ('+'|'-') unary | power; power := atom ['^' unary] (right-associative);
    atom := number | name | name '(' expr ')' | '(' expr ')' | name "'"+."""

    def __init__(self, text: str, ns: Namespace, limits: ExpressionLimits) -> None:
        self.text = text
        self.ns = ns
        self.limits = limits
        self.tokens = tokenize(text, limits)
        self.i = 0
        self.depth = 0

    def peek(self) -> Token:
        return self.tokens[self.i]

    def take(self) -> Token:
        tok = self.tokens[self.i]
        self.i += 1
        return tok

    def error(self, reason: str, tok: Token | None = None) -> ExpressionError:
        tok = tok or self.peek()
        return ExpressionError("expression_syntax", reason, tok.pos, self.text)

    def _enter(self) -> None:
        self.depth += 1
        if self.depth > self.limits.max_depth:
            raise ExpressionError(
                "expression_too_deep",
                f"nesting deeper than {self.limits.max_depth}",
                self.peek().pos,
                self.text,
            )

    def parse_sum(self) -> sympy.Expr:
        self._enter()
        terms = [self.parse_product()]
        while self.peek().kind == "op" and self.peek().text in "+-":
            op = self.take()
            rhs = self.parse_product()
            terms.append(rhs if op.text == "+" else -rhs)
        self.depth -= 1
        return sympy.Add(*terms)

    def parse_product(self) -> sympy.Expr:
        factors = [self.parse_unary()]
        while True:
            tok = self.peek()
            if tok.kind == "op" and tok.text in "*/":
                self.take()
                rhs = self.parse_unary()
                if tok.text == "/":
                    if rhs == 0:
                        raise ExpressionError(
                            "expression_syntax", "division by zero", tok.pos, self.text
                        )
                    rhs = sympy.Pow(rhs, -1)
                factors.append(rhs)
            elif tok.kind in ("num", "name", "lpar"):
                raise self.error(f"missing operator before {tok.text!r}", tok)
            else:
                break
        return sympy.Mul(*factors)

    def parse_unary(self) -> sympy.Expr:
        tok = self.peek()
        if tok.kind == "op" and tok.text in "+-":
            self.take()
            self._enter()
            inner = self.parse_unary()
            self.depth -= 1
            return -inner if tok.text == "-" else inner
        return self.parse_power()

    def parse_power(self) -> sympy.Expr:
        base = self.parse_atom()
        tok = self.peek()
        if tok.kind == "op" and tok.text == "^":
            self.take()
            self._enter()
            exponent = self.parse_unary()
            self.depth -= 1
            return self._pow(base, exponent, tok)
        return base

    def _pow(self, base: sympy.Expr, exponent: sympy.Expr, tok: Token) -> sympy.Expr:
        if exponent.is_number:
            if not exponent.is_Rational:
                if exponent.is_real is False or exponent.free_symbols:
                    raise ExpressionError(
                        "expression_exponent_too_large",
                        "a numeric exponent must be a rational number",
                        tok.pos,
                        self.text,
                    )
                # irrational numeric exponents (pi, sqrt(2)): bounded magnitude only
                if abs(float(exponent)) > self.limits.max_exponent:
                    raise ExpressionError(
                        "expression_exponent_too_large",
                        f"exponent above {self.limits.max_exponent}",
                        tok.pos,
                        self.text,
                    )
            elif abs(exponent) > self.limits.max_exponent or exponent.q > 1000:
                raise ExpressionError(
                    "expression_exponent_too_large",
                    f"|exponent| must be at most {self.limits.max_exponent}",
                    tok.pos,
                    self.text,
                )
            if base == 0 and exponent.is_negative:
                raise ExpressionError(
                    "expression_syntax", "zero to a negative power", tok.pos, self.text
                )
            if base.is_number and base.is_Rational and exponent.is_Rational:
                # exact rational powers of big numbers can still be huge: bound the result
                b = abs(base)
                if b != 0 and b.p > 1 and float(exponent) * max(len(str(b.p)), len(str(b.q))) > 400:
                    raise ExpressionError(
                        "expression_exponent_too_large",
                        "the power would have more than 400 digits",
                        tok.pos,
                        self.text,
                    )
        return sympy.Pow(base, exponent)

    def parse_atom(self) -> sympy.Expr:
        tok = self.take()
        if tok.kind == "num":
            return _number(tok, self.text)
        if tok.kind == "lpar":
            self._enter()
            inner = self.parse_sum()
            self.depth -= 1
            close = self.take()
            if close.kind != "rpar":
                raise self.error("missing ')'", close)
            return inner
        if tok.kind == "name":
            if self.peek().kind == "lpar" and tok.text in FUNCTIONS:
                self.take()
                self._enter()
                arg = self.parse_sum()
                self.depth -= 1
                close = self.take()
                if close.kind != "rpar":
                    raise self.error(
                        f"{tok.text}() takes exactly one argument; expected ')'", close
                    )
                func = FUNCTIONS[tok.text]
                return func(arg)
            if self.peek().kind == "lpar":
                if (
                    tok.text in self.ns.unknowns
                    or tok.text in self.ns.coordinates
                    or tok.text in self.ns.parameters
                ):
                    raise self.error(f"missing operator between {tok.text!r} and '('", self.peek())
                raise ExpressionError(
                    "expression_unknown_name", f"unknown function {tok.text!r}", tok.pos, self.text
                )
            primes = 0
            while self.peek().kind == "prime":
                self.take()
                primes += 1
            if primes:
                if tok.text not in self.ns.unknowns or "t" not in self.ns.coordinates:
                    raise ExpressionError(
                        "expression_bad_derivative",
                        f"a prime marks a time derivative of an unknown; {tok.text!r} is not one",
                        tok.pos,
                        self.text,
                    )
                if primes > self.limits.max_derivative_order:
                    raise ExpressionError(
                        "expression_bad_derivative", "too many primes", tok.pos, self.text
                    )
                return self.ns.field(tok.text, ("t",) * primes)
            return self.ns.symbol_for_name(tok.text, tok.pos, self.text, self.limits)
        if tok.kind == "end":
            raise self.error("unexpected end of the expression", tok)
        raise self.error(f"unexpected {tok.text!r}", tok)


def _node_count(expr: sympy.Expr) -> int:
    return sum(1 for _ in sympy.preorder_traversal(expr))


def _run(text: str, ns: Namespace, limits: ExpressionLimits) -> tuple[list[sympy.Expr], _Parser]:
    if not isinstance(text, str):
        raise ExpressionError("expression_syntax", "an expression must be a string")
    parser = _Parser(text, ns, limits)
    sides = []
    try:
        while True:
            sides.append(parser.parse_sum())
            tok = parser.peek()
            if tok.kind == "end":
                break
            if tok.kind == "eq":
                parser.take()
                if parser.peek().kind == "end":
                    raise parser.error("nothing after '='")
                continue
            if tok.kind == "rpar":
                raise parser.error("unbalanced ')'", tok)
            raise parser.error(f"unexpected {tok.text!r}", tok)
    except RecursionError as exc:  # pragma: no cover - depth limit comes first
        raise ExpressionError("expression_too_deep", "nesting too deep", None, text) from exc
    except (TypeError, ValueError, OverflowError, ZeroDivisionError, AttributeError) as exc:
        if isinstance(exc, ExpressionError):
            raise
        raise ExpressionError(
            "expression_syntax", f"cannot build the expression: {exc}", None, text
        ) from exc
    for side in sides:
        if side.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
            raise ExpressionError(
                "expression_syntax", "the expression is undefined (division by zero)", None, text
            )
        if _node_count(side) > limits.max_nodes:
            raise ExpressionError(
                "expression_too_large",
                f"the expression has more than {limits.max_nodes} nodes",
                None,
                text,
            )
    return sides, parser


def parse_expression(
    text: str, ns: Namespace, limits: ExpressionLimits = DEFAULT_LIMITS
) -> sympy.Expr:
    """Parse one expression (no '=')."""
    sides, parser = _run(text, ns, limits)
    if len(sides) != 1:
        eq = next(t for t in parser.tokens if t.kind == "eq")
        raise ExpressionError(
            "expression_syntax", "'=' is not allowed in an expression", eq.pos, text
        )
    return sides[0]


def parse_equation(
    text: str, ns: Namespace, limits: ExpressionLimits = DEFAULT_LIMITS
) -> tuple[sympy.Expr, sympy.Expr]:
    """Parse ``lhs = rhs`` (exactly one '=')."""
    sides, parser = _run(text, ns, limits)
    if len(sides) == 1:
        raise ExpressionError(
            "expression_not_equation",
            "an equation needs one '=' between its two sides",
            len(text),
            text,
        )
    if len(sides) > 2:
        eqs = [t for t in parser.tokens if t.kind == "eq"]
        raise ExpressionError(
            "expression_syntax", "an equation has exactly one '='", eqs[1].pos, text
        )
    return sides[0], sides[1]


def parse_time_function(
    text: str,
    parameters: Mapping[str, float] | None = None,
    limits: ExpressionLimits = DEFAULT_LIMITS,
) -> sympy.Expr:
    """An expression in ``t`` only (parameters substituted by their exact values)."""
    params = dict(parameters or {})
    ns = Namespace(coordinates=("t",), unknowns=(), parameters=tuple(params))
    expr = parse_expression(text, ns, limits)
    values = {}
    for name, value in params.items():
        frac = Fraction(value)
        values[ns.parameter(name)] = sympy.Rational(frac.numerator, frac.denominator)
    return expr.xreplace(values)


def _display_map(expr: sympy.Expr, ns: Namespace, latex: bool) -> dict[sympy.Symbol, str]:
    names = {}
    for s in expr.free_symbols:
        if isinstance(s, sympy.Symbol):
            names[s] = ns.latex_name(s) if latex else ns.display_name(s)
    return names


def to_text(expr: sympy.Expr, ns: Namespace) -> str:
    """The expression in the user's names, in our grammar's syntax (re-parses to itself)."""
    names = _display_map(expr, ns, latex=False)
    display = {s: sympy.Symbol(n, real=True) for s, n in names.items()}
    out = sympy.sstr(expr.xreplace(display), order="none")
    return out.replace("**", "^").replace("Abs(", "abs(")


def to_latex(expr: sympy.Expr, ns: Namespace) -> str:
    """LaTeX of the expression with the user's names."""
    return sympy.latex(expr, symbol_names=_display_map(expr, ns, latex=True))
