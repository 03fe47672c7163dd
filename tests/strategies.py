"""Shared Hypothesis strategies for the expression grammar.

:func:`expressions` draws a random *well-formed* expression of the grammar in
``docs/expressions.md`` together with a reference value computed here, in plain Python
floats, from the expression tree the text was rendered from.  The rendering inserts
only the parentheses the documented precedence requires (plus a few redundant ones), so
comparing the parser's result with the reference value checks precedence and
associativity against an implementation that does not share code with the parser.

Values are kept inside the domains of the functions (no log of negatives, no poles,
no huge numbers) by construction, so the reference is always a finite real number.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction

from hypothesis import strategies as st

from boundsvc.expr import Namespace

# The test namespace: three coordinates, two unknowns, three parameters.
COORDINATES = ("t", "x", "y")
UNKNOWNS = ("u", "v")
PARAMETERS = ("nu", "k", "alpha_1")
NAMESPACE = Namespace(coordinates=COORDINATES, unknowns=UNKNOWNS, parameters=PARAMETERS)

# (spelling, canonical name): several spellings of one derivative share one value,
# which checks derivative canonicalisation numerically as well.
SPELLINGS: tuple[tuple[str, str], ...] = (
    ("t", "t"),
    ("x", "x"),
    ("y", "y"),
    ("nu", "nu"),
    ("k", "k"),
    ("alpha_1", "alpha_1"),
    ("u", "u"),
    ("v", "v"),
    ("u_t", "u_t"),
    ("u'", "u_t"),
    ("u_x", "u_x"),
    ("u_xx", "u_xx"),
    ("u_tx", "u_tx"),
    ("u_xt", "u_tx"),
    ("u_x'", "u_tx"),
    ("u_yx", "u_xy"),
    ("u_xy", "u_xy"),
    ("v''", "v_tt"),
    ("v_tt", "v_tt"),
    ("v_t'", "v_tt"),
    ("u_txy", "u_txy"),
    ("u_yxt", "u_txy"),
)
CANONICAL_NAMES: tuple[str, ...] = tuple(sorted({canonical for _, canonical in SPELLINGS}))

# Precedence levels of a rendered piece: what it may appear inside without parentheses.
SUM, PRODUCT, UNARY, POWER, ATOM = 1, 2, 3, 4, 5
_MAX_MAGNITUDE = 1e6

_FUNCTIONS: dict[str, Callable[[float], float]] = {
    "sin": math.sin,
    "cos": math.cos,
    "tan": math.tan,
    "exp": math.exp,
    "log": math.log,
    "sqrt": math.sqrt,
    "tanh": math.tanh,
    "sinh": math.sinh,
    "cosh": math.cosh,
    "abs": abs,
}


@dataclass(frozen=True)
class Piece:
    """A rendered sub-expression with its reference value.

    Attributes
    ----------
    text : str
        Grammar text.
    value : float
        Reference value at the drawn point.
    level : int
        Precedence level of ``text`` (``SUM`` ... ``ATOM``).
    scale : float
        Largest magnitude of any intermediate value (for the comparison tolerance).
    """

    text: str
    value: float
    level: int
    scale: float
    has_name: bool = False


@dataclass(frozen=True)
class GeneratedExpression:
    """A drawn expression: text, reference value and the point it was evaluated at."""

    text: str
    value: float
    scale: float
    point: dict[str, Fraction]


def _domain_ok(name: str, x: float) -> bool:
    if name == "log":
        return x > 0.05
    if name == "sqrt":
        return x > 0.05
    if name == "tan":
        return abs(math.cos(x)) > 0.2
    if name in ("exp", "sinh", "cosh"):
        return abs(x) < 10
    return True


def _wrap(piece: Piece, minimum: int, extra: bool) -> str:
    """``piece.text``, parenthesised if its level is below ``minimum`` (or if ``extra``)."""
    if piece.level < minimum or extra:
        return "(" + piece.text + ")"
    return piece.text


def _combine(a: Piece, b: Piece, text: str, value: float, level: int) -> Piece:
    scale = max(a.scale, b.scale, abs(value))
    return Piece(text, value, level, scale, a.has_name or b.has_name)


def numbers() -> st.SearchStrategy[tuple[str, Fraction]]:
    """Non-negative number literals in every supported notation, with exact values."""
    integer = st.integers(0, 999).map(lambda n: (str(n), Fraction(n)))
    decimal = st.tuples(st.integers(0, 99), st.integers(0, 99)).map(
        lambda p: (f"{p[0]}.{p[1]:02d}", Fraction(p[0]) + Fraction(p[1], 100))
    )
    leading_dot = st.integers(1, 99).map(lambda n: (f".{n:02d}", Fraction(n, 100)))
    trailing_dot = st.integers(0, 99).map(lambda n: (f"{n}.", Fraction(n)))
    scientific = st.tuples(
        st.integers(1, 99),
        st.sampled_from("eE"),
        st.sampled_from(["", "+", "-"]),
        st.integers(0, 3),
    ).map(
        lambda p: (
            f"{p[0]}{p[1]}{p[2]}{p[3]}",
            Fraction(p[0]) * Fraction(10) ** (-p[3] if p[2] == "-" else p[3]),
        )
    )
    return st.one_of(integer, decimal, leading_dot, trailing_dot, scientific)


def points() -> st.SearchStrategy[dict[str, Fraction]]:
    """Exact values in [-3, 3] (steps of 1/100) for every canonical name."""
    value = st.integers(-300, 300).map(lambda n: Fraction(n, 100))
    return st.fixed_dictionaries({name: value for name in CANONICAL_NAMES})


@st.composite
def _piece(draw: st.DrawFn, depth: int, point: dict[str, Fraction]) -> Piece:
    space = draw(st.sampled_from(["", "", " "]))
    extra = draw(st.integers(0, 9)) == 0  # occasional redundant parentheses
    kinds = ["number", "name", "constant"]
    if depth > 0:
        kinds += ["add", "sub", "mul", "div", "neg", "plus", "pow", "call"] * 2
    kind = draw(st.sampled_from(kinds))
    if kind == "number":
        text, exact = draw(numbers())
        return Piece(text, float(exact), ATOM, float(exact))
    if kind == "name":
        spelling, canonical = draw(st.sampled_from(SPELLINGS))
        value = float(point[canonical])
        return Piece(spelling, value, ATOM, abs(value), has_name=True)
    if kind == "constant":
        name = draw(st.sampled_from(["pi", "E"]))
        value = math.pi if name == "pi" else math.e
        return Piece(name, value, ATOM, value)
    if kind in ("neg", "plus"):
        operand = draw(_piece(depth - 1, point))
        # unary := ('+'|'-') unary | power, so a sum or product operand needs parentheses.
        text = ("-" if kind == "neg" else "+") + _wrap(operand, UNARY, extra)
        value = -operand.value if kind == "neg" else operand.value
        return Piece(text, value, UNARY, operand.scale, operand.has_name)
    if kind == "call":
        name = draw(st.sampled_from(sorted(_FUNCTIONS)))
        argument = draw(_piece(depth - 1, point))
        if not _domain_ok(name, argument.value):
            name = "abs" if name in ("log", "sqrt") and argument.value < 0 else "sin"
            if not _domain_ok(name, argument.value):
                name = "sin"
        value = _FUNCTIONS[name](argument.value)
        scale = max(argument.scale, abs(value))
        return Piece(f"{name}({argument.text})", value, ATOM, scale, argument.has_name)
    if kind == "pow":
        return draw(_power(depth, point, space))
    left = draw(_piece(depth - 1, point))
    right = draw(_piece(depth - 1, point))
    if kind in ("add", "sub"):
        # Left-associative: a right operand that is itself a sum needs parentheses.
        op = "+" if kind == "add" else "-"
        text = f"{_wrap(left, SUM, False)}{space}{op}{space}{_wrap(right, PRODUCT, extra)}"
        value = left.value + right.value if op == "+" else left.value - right.value
        return _combine(left, right, text, value, SUM)
    if kind == "div" and abs(right.value) < 0.05:
        kind = "mul"  # keep clear of division by (nearly) zero
    op = "*" if kind == "mul" else "/"
    value = left.value * right.value if op == "*" else left.value / right.value
    if abs(value) > _MAX_MAGNITUDE:
        return left
    text = f"{_wrap(left, PRODUCT, False)}{space}{op}{space}{_wrap(right, UNARY, extra)}"
    return _combine(left, right, text, value, PRODUCT)


@st.composite
def _power(draw: st.DrawFn, depth: int, point: dict[str, Fraction], space: str) -> Piece:
    base = draw(_piece(depth - 1, point))
    op = draw(st.sampled_from(["^", "**"]))
    # power := primary ('^' unary)?  -> the base must be an atom (a power or a sign needs
    # parentheses: (a^b)^c, (-a)^2); the exponent may be a signed power (2^-x, a^b^c).
    base_text = _wrap(base, ATOM, False)
    choice = draw(st.sampled_from(["int", "negint", "fraction", "expr"]))
    if choice == "int" or (choice == "negint" and abs(base.value) < 0.1):
        n = draw(st.integers(0, 3))
        exponent_text, exponent = str(n), float(n)
        if draw(st.booleans()):
            exponent_text = "+" + exponent_text
    elif choice == "negint":
        n = draw(st.integers(1, 3))
        exponent_text = draw(st.sampled_from([f"-{n}", f"(-{n})"]))
        exponent = -float(n)
    elif choice == "fraction" and base.value > 0.05:
        p, q = draw(st.sampled_from([(1, 2), (3, 2), (1, 3), (-1, 2), (2, 3)]))
        exponent_text = f"({p}/{q})" if p > 0 else f"(-{-p}/{q})"
        exponent = p / q
    elif choice == "expr" and 0.1 < base.value < 10:
        sub = draw(_piece(depth - 1, point))
        # A purely numeric exponent such as .01 (= 1/100) breaks the "simple fraction"
        # rule on purpose; only exponents containing a name go here.
        if abs(sub.value) > 3 or not sub.has_name:
            return base
        # Right-associative: a power exponent needs no parentheses; a sum does.
        exponent_text = _wrap(sub, UNARY, draw(st.booleans()))
        exponent = sub.value
    else:
        return base
    value = float(base.value**exponent)
    if abs(value) > _MAX_MAGNITUDE or (exponent < 0 and abs(base.value) < 0.1):
        return base
    text = f"{base_text}{space}{op}{space}{exponent_text}"
    return Piece(text, value, POWER, max(base.scale, abs(value)), base.has_name)


@st.composite
def expressions(draw: st.DrawFn, max_depth: int = 4) -> GeneratedExpression:
    """A well-formed expression over :data:`NAMESPACE` with its reference value."""
    point = draw(points())
    depth = draw(st.integers(0, max_depth))
    piece = draw(_piece(depth, point))
    return GeneratedExpression(piece.text, piece.value, piece.scale, point)


# Fuzzing material: fragments that make random texts reach deep into the parser.
GRAMMAR_FRAGMENTS: tuple[str, ...] = (
    *(s for s, _ in SPELLINGS),
    *_FUNCTIONS,
    "pi",
    "E",
    "e",
    "w",
    "u_q",
    "u_xxxxx",
    "0",
    "1",
    "2",
    "9",
    "64",
    "65",
    ".5",
    "1e3",
    "1e-3",
    "2.5E+4",
    "1e999",
    "123456789012345678901234567890123456789012345",
    "+",
    "-",
    "*",
    "/",
    "^",
    "**",
    "(",
    ")",
    ",",
    "=",
    "==",
    "'",
    " ",
    "\t",
    ".",
    "_",
    "[",
    "\x00",
    "\u202e",
    "\u200b",
    "é",
)


def grammar_soup() -> st.SearchStrategy[str]:
    """Random concatenations of grammar fragments (mostly invalid, often nearly valid)."""
    return st.lists(st.sampled_from(GRAMMAR_FRAGMENTS), max_size=40).map("".join)
