"""Grammar, namespaces, numbers, error codes and printing of ``boundsvc.expr``."""

from __future__ import annotations

import dataclasses
import pickle
import re
from typing import Any

import pytest
import sympy

from boundsvc.expr import (
    DEFAULT_LIMITS,
    ERROR_CODES,
    ExpressionError,
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

NS = Namespace(coordinates=("t", "x"), unknowns=("u",), parameters=("nu", "k"))
NS3 = Namespace(
    coordinates=("t", "x", "y", "z"), unknowns=("u", "v", "p"), parameters=("alpha_1", "Re")
)
t = NS.coordinate("t")
x = NS.coordinate("x")
u = NS.field("u")
nu = NS.parameter("nu")
k = NS.parameter("k")


def parse(text: str, ns: Namespace = NS, limits: ExpressionLimits = DEFAULT_LIMITS) -> Any:
    return parse_expression(text, ns, limits)


def expect_error(
    call: Any, code: str, position: int | None, match: str | None = None
) -> ExpressionError:
    with pytest.raises(ExpressionError, match=match) as info:
        call()
    err = info.value
    assert err.code == code, (err.code, str(err))
    assert err.position == position, (err.position, str(err))
    assert err.code in ERROR_CODES
    return err


# -- precedence and associativity ------------------------------------------------------
PRECEDENCE = [
    ("x+t*k", x + t * k),
    ("(x+t)*k", (x + t) * k),
    ("x-t-k", (x - t) - k),
    ("x-(t-k)", x - (t - k)),
    ("x/t/k", (x / t) / k),
    ("x/(t/k)", x / (t / k)),
    ("x/t*k", (x / t) * k),
    ("x*t/k", x * t / k),
    ("-x^2", -(x**2)),
    ("(-x)^2", (-x) ** 2),
    ("-2^2", sympy.Integer(-4)),
    ("(-2)^2", sympy.Integer(4)),
    ("2^-1", sympy.Rational(1, 2)),
    ("2**-1", sympy.Rational(1, 2)),
    ("2^-2^2", sympy.Rational(1, 16)),
    ("2^3^2", sympy.Integer(512)),
    ("2**3**2", sympy.Integer(512)),
    ("2^3**2", sympy.Integer(512)),
    ("(2^3)^2", sympy.Integer(64)),
    ("x^t^k", x ** (t**k)),
    ("x^-t^k", x ** (-(t**k))),
    ("x^2^-1", sympy.sqrt(x)),
    ("-x*t", -(x * t)),
    ("x*-t", -(x * t)),
    ("x--t", x + t),
    ("x+-t", x - t),
    ("--x", x),
    ("+x", x),
    ("-+-x", x),
    ("2*x^2/3", sympy.Rational(2, 3) * x**2),
    ("1/2*x", x / 2),
    ("1/(2*x)", 1 / (2 * x)),
    ("x^t*k", x**t * k),
    ("k*x^t", k * x**t),
    ("sin(x)^2", sympy.sin(x) ** 2),
    ("-sin(x)^2", -(sympy.sin(x) ** 2)),
    ("exp(-x^2/2)", sympy.exp(-(x**2) / 2)),
    ("  x \t+\tt  ", x + t),
    ("((((x))))", x),
]


@pytest.mark.parametrize(("text", "expected"), PRECEDENCE, ids=[p[0] for p in PRECEDENCE])
def test_precedence_and_associativity(text: str, expected: Any) -> None:
    result = parse(text)
    assert result == expected
    # Structural equality could hide a mistake that sympy happens to normalise away;
    # the numeric check cannot.
    point = {t: sympy.Rational(3, 7), x: sympy.Rational(5, 11), k: sympy.Rational(-2, 3)}
    assert sympy.simplify(result.xreplace(point) - expected.xreplace(point)) == 0


def test_functions_and_constants() -> None:
    assert parse("sin(x)+cos(x)+tan(x)") == sympy.sin(x) + sympy.cos(x) + sympy.tan(x)
    assert parse("exp(x)*log(x)") == sympy.exp(x) * sympy.log(x)
    assert parse("sqrt(x)") == sympy.sqrt(x)
    assert parse("tanh(x)-sinh(x)+cosh(x)") == sympy.tanh(x) - sympy.sinh(x) + sympy.cosh(x)
    assert parse("abs(x)") == sympy.Abs(x)
    assert parse("pi*E") == sympy.pi * sympy.E
    assert parse("log(E)") == 1
    assert parse("E^x") == sympy.exp(x)
    assert parse("x^t") == x**t  # symbolic exponents are fine


# -- numbers ---------------------------------------------------------------------------
NUMBERS = [
    ("0", sympy.Integer(0)),
    ("007", sympy.Integer(7)),
    ("0.1", sympy.Rational(1, 10)),
    (".5", sympy.Rational(1, 2)),
    ("5.", sympy.Integer(5)),
    ("1.e2", sympy.Integer(100)),
    ("1e-3", sympy.Rational(1, 1000)),
    ("2.5E+4", sympy.Integer(25000)),
    ("12.5e-1", sympy.Rational(5, 4)),
    ("0e99999", sympy.Integer(0)),
    ("1" * 40, sympy.Integer(int("1" * 40))),
    ("1e39", sympy.Integer(10**39)),
    ("1e-40", sympy.Rational(1, 10**40)),
    ("0.3333333333333333333333333333333333333333", sympy.Rational(int("3" * 40), 10**40)),
]


@pytest.mark.parametrize(("text", "expected"), NUMBERS, ids=[n[0][:20] for n in NUMBERS])
def test_numbers_are_exact(text: str, expected: Any) -> None:
    result = parse(text)
    assert result == expected
    assert result.is_Rational
    assert not result.atoms(sympy.Float)


def test_decimal_arithmetic_is_exact() -> None:
    assert parse("0.1+0.2") == sympy.Rational(3, 10)
    assert parse("0.1*x").atoms(sympy.Number) == {sympy.Rational(1, 10)}


# -- names and derivatives -------------------------------------------------------------
def test_internal_symbols_are_never_user_names() -> None:
    expr = parse("nu*u_xx + k*u_t + t + x + u")
    names = {s.name for s in expr.free_symbols}
    assert names == {"_p0", "_f0_xx", "_p1", "_f0_t", "_c_t", "_c_x", "_f0_"}
    assert all(s.is_real for s in expr.free_symbols)


@pytest.mark.parametrize(
    ("spellings", "derivative"),
    [
        (["u_tx", "u_xt", "u_x'"], ("t", "x")),
        (["u_t", "u'"], ("t",)),
        (["u_tt", "u''", "u_t'"], ("t", "t")),
        (["u_txx", "u_xtx", "u_xxt", "u_xx'"], ("t", "x", "x")),
        (["u_xy", "u_yx"], ("x", "y")),
        (["u_tz", "u_zt", "u_z'"], ("t", "z")),
        (["u_xyzt", "u_tzyx", "u_zyx'"], ("t", "x", "y", "z")),
    ],
)
def test_derivative_order_is_irrelevant(spellings: list[str], derivative: tuple[str, ...]) -> None:
    symbol = NS3.field("u", derivative)
    for spelling in spellings:
        assert parse(spelling, NS3) == symbol, spelling
    info = NS3.describe(symbol)
    assert info == SymbolInfo(
        "field", "u_" + "".join(derivative), 0, "u", derivative, len(derivative)
    )
    assert NS3.field("u", tuple(reversed(derivative))) == symbol


def test_fields_of_several_unknowns() -> None:
    assert parse("v_x", NS3) == NS3.field("v", ("x",))
    assert parse("p", NS3).name == "_f2_"
    assert parse("v''", NS3).name == "_f1_tt"
    assert parse("u_tx - u_xt", NS3) == 0


def test_derivative_order_limits() -> None:
    assert parse("u_xxxx").name == "_f0_xxxx"
    expect_error(lambda: parse("u_xxxxx"), "expression_bad_derivative", 0, "order 5")
    expect_error(lambda: parse("u_xxx''"), "expression_bad_derivative", 0, "order 5")
    low = Namespace(max_derivative_order=2)
    assert parse("u_tx", low).name == "_f0_tx"
    expect_error(lambda: parse("1+u_txx", low), "expression_bad_derivative", 2, "at most 2")
    # The smaller of the namespace's and the limits' orders applies.
    limits = ExpressionLimits(max_derivative_order=1)
    expect_error(lambda: parse("u_xx", NS, limits), "expression_bad_derivative", 0, "at most 1")


def test_derivative_suffix_applies_the_chain_rule() -> None:
    # (f(u))_x = f'(u) u_x: the product and chain rules of calculus, checked against sympy's
    # own differentiation of the same expression with u = u(x) a function.
    ux, uxx = NS.field("u", ("x",)), NS.field("u", ("x", "x"))
    assert parse("(u^2/2)_x") == u * ux
    assert sympy.expand(parse("(u^3/3 - u)_x") - (u**2 - 1) * ux) == 0
    assert sympy.expand(parse("((1 + x^2)*u_x)_x") - (2 * x * ux + (1 + x**2) * uxx)) == 0
    assert parse("(sin(u))_x") == sympy.cos(u) * ux
    assert parse("(u)_tx") == NS.field("u", ("t", "x"))
    # a conservation law typed in flux form and in expanded form is the same equation
    flux, expanded = parse_equation("u_t + (u^2/2)_x = nu*u_xx", NS)
    same, same_rhs = parse_equation("u_t + u*u_x = nu*u_xx", NS)
    assert (flux, expanded) == (same, same_rhs)
    # an independent check: sympy differentiating u(x)^3 sin(x) by x
    fx = sympy.Function("f")(x)
    reference = sympy.diff(fx**3 * sympy.sin(x), x).subs(sympy.Derivative(fx, x), ux).subs(fx, u)
    assert sympy.expand(parse("(u^3*sin(x))_x") - reference) == 0


def test_derivative_suffix_errors() -> None:
    expect_error(lambda: parse("(u)_y"), "expression_bad_derivative", 3, "not a coordinate")
    expect_error(lambda: parse("(u_xxxx)_x"), "expression_bad_derivative", 8, "order 5")
    # only directly after ')': a name never starts with '_'
    expect_error(lambda: parse("u + _x"), "expression_syntax", 4, "start with a letter")
    expect_error(lambda: parse("(u)_x(t)"), "expression_missing_operator", 5)


def test_unused_coordinate_letters_are_free_names() -> None:
    lorenz = Namespace(coordinates=("t",), unknowns=("x", "y", "z"), parameters=("sigma",))
    assert parse("sigma*(y - x)", lorenz) == lorenz.parameter("sigma") * (
        lorenz.field("y") - lorenz.field("x")
    )
    assert parse("x'", lorenz) == lorenz.field("x", ("t",))
    assert parse("x_t", lorenz) == parse("x'", lorenz)
    expect_error(lambda: parse("x_x", lorenz), "expression_bad_derivative", 0, "not a coordinate")
    expect_error(lambda: parse("t*z_z", lorenz), "expression_bad_derivative", 2)


def test_prime_needs_time() -> None:
    space = Namespace(coordinates=("x",))
    expect_error(lambda: parse("u'", space), "expression_bad_derivative", 0, "t is not")
    expect_error(lambda: parse("x'"), "expression_bad_derivative", 0, "coordinate")
    expect_error(lambda: parse("nu'"), "expression_bad_derivative", 0, "parameter")
    expect_error(lambda: parse("1+pi'"), "expression_bad_derivative", 2, "prime")
    expect_error(lambda: parse("sin'(x)"), "expression_syntax", 0, "prime")
    expect_error(lambda: parse("(u)'"), "expression_syntax", 3, "prime")


# -- errors: code and position ---------------------------------------------------------
ERRORS = [
    ("", "expression_empty", 0, "empty"),
    (" \t ", "expression_empty", 0, "empty"),
    ("x+é", "expression_bad_character", 2, r"U\+00E9"),
    ("x\x00", "expression_bad_character", 1, "NUL"),
    ("x\n+t", "expression_bad_character", 1, "LINE FEED"),
    ("x\u202e+t", "expression_bad_character", 1, "RIGHT-TO-LEFT OVERRIDE"),
    ("[x]", "expression_bad_character", 0, "parentheses"),
    ("x;t", "expression_bad_character", 1, "one expression"),
    ("x#", "expression_bad_character", 1, "not allowed"),
    ("_x", "expression_syntax", 0, "start with a letter"),
    ("x.y", "expression_syntax", 1, "decimal point"),
    ("'x", "expression_syntax", 0, "prime"),
    ("x ==t", "expression_syntax", 2, "=="),
    ("x+", "expression_syntax", 2, "end of the text"),
    ("*x", "expression_syntax", 0, "found '\\*'"),
    ("x+*t", "expression_syntax", 2, "expected a number"),
    ("(x", "expression_syntax", 2, "close the '\\(' at position 0"),
    ("x)", "expression_syntax", 1, "no matching"),
    ("()", "expression_syntax", 1, "found '\\)'"),
    ("x,t", "expression_syntax", 1, "function arguments"),
    ("2x", "expression_missing_operator", 1, "missing operator between '2' and 'x'"),
    ("2 x", "expression_missing_operator", 2, "missing operator between '2' and 'x'"),
    ("x(1+t)", "expression_missing_operator", 1, "between 'x' and '\\('"),
    ("(x)(t)", "expression_missing_operator", 3, "between '\\)' and '\\('"),
    ("x^2 t", "expression_missing_operator", 4, "between '2' and 't'"),
    ("sin(x)cos(x)", "expression_missing_operator", 6, "between '\\)' and 'cos'"),
    ("sin(x, t)", "expression_bad_call", 5, "exactly one argument"),
    ("sin()", "expression_bad_call", 4, "exactly one argument"),
    ("sin x", "expression_bad_call", 4, "followed by '\\('"),
    ("1+sin", "expression_bad_call", 5, "followed by '\\('"),
    ("w", "expression_unknown_name", 0, "unknown name 'w'"),
    ("x+e", "expression_unknown_name", 2, "written E"),
    ("Sin(x)", "expression_unknown_name", 0, "did you mean 'sin'"),
    ("ln(x)", "expression_unknown_name", 0, "written log"),
    ("y", "expression_unknown_name", 0, "not a coordinate here"),
    ("w_x", "expression_unknown_name", 0, "'w' is not an unknown"),
    ("u_", "expression_bad_derivative", 0, "names no derivative"),
    ("u_q", "expression_bad_derivative", 0, "'q' in a derivative"),
    ("u_y", "expression_bad_derivative", 0, "not a coordinate"),
    ("9^9^9", "expression_exponent_too_large", 1, "387420489"),
    ("x^65", "expression_exponent_too_large", 1, "65"),
    ("x^(1/65)", "expression_exponent_too_large", 1, "q <= 64"),
    ("x^-65", "expression_exponent_too_large", 1, "-65"),
    ("(x^64)^64*x", "expression_exponent_too_large", 9, "combining powers"),
    ("1" * 41, "expression_number_too_large", 0, "41 digits before"),
    ("x+1e41", "expression_number_too_large", 2, "42 digits before"),
    ("1e-41", "expression_number_too_large", 0, "41 digits after"),
    ("1e9999999999", "expression_number_too_large", 0, "exponent with 10 digits"),
    ("((2^64)^64)^64", "expression_number_too_large", 11, "2560"),
    ("sqrt(1000000000000000000000000000039)", "expression_number_too_large", 0, "prime"),
    ("1/0", "expression_undefined", 1, "division by zero"),
    ("x/(t-t)", "expression_undefined", 1, "division by zero"),
    ("log(0)", "expression_undefined", 0, "undefined"),
    ("1+tan(pi/2)", "expression_undefined", 2, "undefined"),
    ("0^-1", "expression_undefined", 1, "undefined"),
    ("sqrt(-1)", "expression_not_real", 0, "not real"),
    ("1+log(-1)", "expression_not_real", 2, "not real"),
    ("(-8)^(1/3)", "expression_not_real", 4, "principal"),
    ("x=t", "expression_unexpected_equation", 1, "not an equation"),
]


@pytest.mark.parametrize(
    ("text", "code", "position", "match"), ERRORS, ids=[f"{e[1]}:{e[0][:16]!r}" for e in ERRORS]
)
def test_error_code_and_position(text: str, code: str, position: int, match: str) -> None:
    err = expect_error(lambda: parse(text), code, position, match)
    assert err.text == text
    assert str(err) == f"{err.reason} at position {position}"


def test_too_long_is_checked_first() -> None:
    text = "\x00" * 3000  # bad characters, but the length is what is reported
    expect_error(lambda: parse(text), "expression_too_long", 2000, "3000 characters")
    expect_error(
        lambda: parse("x" * 11, NS, ExpressionLimits(max_length=10)), "expression_too_long", 10
    )


def test_too_deep_and_too_large() -> None:
    ok = "(" * 48 + "x" + ")" * 48
    assert parse(ok) == x
    expect_error(lambda: parse("(" * 49 + "x" + ")" * 49), "expression_too_deep", 48, "48")
    expect_error(lambda: parse("-" * 49 + "x"), "expression_too_deep", 48)
    expect_error(lambda: parse("sin(" * 49 + "x" + ")" * 49), "expression_too_deep", 195)
    text = "+".join(["x"] * 751)  # 1501 tokens
    expect_error(lambda: parse(text), "expression_too_large", 1500, "1500 tokens")
    assert parse("+".join(["x"] * 750)) == 750 * x


def test_equations() -> None:
    lhs, rhs = parse_equation("u_t = nu*u_xx - u*u_x", NS)
    assert lhs == NS.field("u", "t")
    assert rhs == nu * NS.field("u", "xx") - u * NS.field("u", "x")
    assert parse_equation("u'=-u", NS) == (NS.field("u", "t"), -u)
    expect_error(lambda: parse_equation("u_t", NS), "expression_not_equation", None, "no '='")
    expect_error(
        lambda: parse_equation("a=b=c", Namespace(parameters=("a", "b", "c"))),
        "expression_syntax",
        3,
        "exactly one",
    )
    expect_error(lambda: parse_equation("x==t", NS), "expression_syntax", 1, "==")
    expect_error(lambda: parse_equation("=x", NS), "expression_syntax", 0, "found '='")
    expect_error(lambda: parse_equation("x=", NS), "expression_syntax", 2, "end of the text")
    expect_error(lambda: parse_equation("x=t)", NS), "expression_syntax", 3, "no matching")


def test_not_text() -> None:
    expect_error(lambda: parse(12), "expression_not_text", None, "got int")  # type: ignore[arg-type]


def test_foreign_symbols_and_bad_inputs_to_printers() -> None:
    alien = sympy.Symbol("u")
    expect_error(lambda: to_text(alien + x, NS), "expression_foreign_symbol", None, "'u'")
    expect_error(lambda: to_latex(alien, NS), "expression_foreign_symbol", None)
    assert NS.describe(sympy.Symbol("_c_t")) is None  # not real=True: another symbol
    assert NS.describe(NS3.coordinate("y")) is None
    assert NS.describe(sympy.Integer(1)) is None
    expect_error(lambda: NS.info(sympy.Symbol("_c_t")), "expression_foreign_symbol", None)
    expect_error(lambda: NS.display_name(alien), "expression_foreign_symbol", None)
    expect_error(lambda: NS.latex_name(alien), "expression_foreign_symbol", None)
    expect_error(lambda: NS.fields_in(alien * u), "expression_foreign_symbol", None)
    # Symbols carry meaning by position: NS3's second parameter *is* NS's second one.
    assert NS.describe(NS3.parameter("Re")).name == "k"
    expect_error(lambda: to_text(3, NS), "expression_unsupported", None, "sympy expression")


def test_sympy_failures_are_wrapped(monkeypatch: pytest.MonkeyPatch) -> None:
    def broken(*args: Any) -> Any:
        raise TypeError("boom")

    monkeypatch.setattr(sympy, "Add", broken)
    expect_error(lambda: parse("x+t"), "expression_unsupported", 0, "TypeError")


# -- namespaces ------------------------------------------------------------------------
@pytest.mark.parametrize(
    "name",
    [
        "",
        "1a",
        "_a",
        "a-b",
        "a b",
        "é",
        "a\u202e",
        "sin",
        "pi",
        "E",
        "abs",
        "t",
        "x",
        "u",
        "u_x",
        "u_0",
        "a" * 65,
    ],
)
def test_invalid_parameter_names(name: str) -> None:
    err = expect_error(lambda: Namespace(parameters=(name,)), "invalid_parameter_name", None)
    assert "\u202e" not in str(err)  # names are escaped in messages


def test_namespace_validation() -> None:
    expect_error(
        lambda: Namespace(parameters=("a", "a")), "invalid_parameter_name", None, "already"
    )
    expect_error(lambda: Namespace(unknowns=("u_x",)), "invalid_unknown_name", None)
    expect_error(lambda: Namespace(unknowns=("t",)), "invalid_unknown_name", None, "already")
    expect_error(lambda: Namespace(unknowns=("exp",)), "invalid_unknown_name", None, "reserved")
    expect_error(lambda: Namespace(coordinates=("w",)), "invalid_namespace", None, "t, x, y, z")
    expect_error(lambda: Namespace(coordinates=("t", "t")), "invalid_namespace", None, "twice")
    expect_error(lambda: Namespace(coordinates="tx"), "invalid_namespace", None, "not str")  # type: ignore[arg-type]
    expect_error(lambda: Namespace(parameters=(1,)), "invalid_namespace", None)  # type: ignore[arg-type]
    expect_error(lambda: Namespace(max_derivative_order=9), "invalid_namespace", None, "0 to 8")
    expect_error(lambda: Namespace(max_derivative_order=True), "invalid_namespace", None)
    expect_error(lambda: ExpressionLimits(max_depth=0), "invalid_limits", None, "at least 1")
    expect_error(lambda: ExpressionLimits(max_nodes="9"), "invalid_limits", None)  # type: ignore[arg-type]
    expect_error(lambda: parse_expression("x", NS, limits=3), "invalid_limits", None)  # type: ignore[arg-type]
    expect_error(lambda: parse_expression("x", "ns"), "invalid_namespace", None)  # type: ignore[arg-type]
    # Parameters may use underscores, and names that merely start like an unknown.
    ns = Namespace(parameters=("k_max", "uu", "U_x"))
    assert parse("k_max+uu+U_x", ns).free_symbols == set(ns.parameter_symbols)


def test_namespace_is_a_value() -> None:
    a = Namespace(coordinates=["x", "t"], unknowns=["u"], parameters=["nu"])
    b = Namespace(coordinates=("t", "x"), unknowns=("u",), parameters=("nu",))
    assert a == b
    assert hash(a) == hash(b)
    assert a.coordinates == ("t", "x")  # canonical order
    assert a.coordinate_symbols == (t, x)
    assert a.parameter_symbols == (nu,)
    with pytest.raises(dataclasses.FrozenInstanceError):
        a.unknowns = ("v",)  # type: ignore[misc]


def test_describe_and_queries() -> None:
    expr = parse("nu*u_xx + k + t*u", NS)
    assert NS.describe(nu) == SymbolInfo("parameter", "nu", 0)
    assert NS.describe(x) == SymbolInfo("coordinate", "x", 1)
    assert [i.name for i in NS.symbols_in(expr)] == ["t", "nu", "k", "u", "u_xx"]
    assert [i.name for i in NS.fields_in(expr)] == ["u", "u_xx"]
    assert [i.name for i in NS.parameters_in(expr)] == ["nu", "k"]
    assert [i.name for i in NS.coordinates_in(expr)] == ["t"]
    assert NS.display_name(NS.field("u", "xt")) == "u_tx"
    expect_error(lambda: NS.coordinate("y"), "expression_unknown_name", None)
    expect_error(lambda: NS.parameter("mu"), "expression_unknown_name", None)
    expect_error(lambda: NS.field("w"), "expression_unknown_name", None)
    expect_error(lambda: NS.field("u", "q"), "expression_bad_derivative", None)
    expect_error(lambda: NS.field("u", "xxxxx"), "expression_bad_derivative", None)


@pytest.mark.parametrize(
    ("ns", "name", "latex"),
    [
        (Namespace(parameters=("nu",)), "nu", r"\nu"),
        (Namespace(parameters=("Gamma",)), "Gamma", r"\Gamma"),
        (Namespace(parameters=("k",)), "k", "k"),
        (Namespace(parameters=("Re",)), "Re", r"\mathrm{Re}"),
        (Namespace(parameters=("alpha_1",)), "alpha_1", r"\alpha_{1}"),
        (Namespace(parameters=("k_max",)), "k_max", r"k_{\mathrm{max}}"),
        (Namespace(parameters=("a_b_c",)), "a_b_c", r"a_{\mathrm{b\_c}}"),
        (Namespace(parameters=("x_nu",), coordinates=("t",)), "x_nu", r"x_{\nu}"),
    ],
)
def test_latex_names_of_parameters(ns: Namespace, name: str, latex: str) -> None:
    assert ns.latex_name(ns.parameter(name)) == latex


def test_latex_names_of_fields() -> None:
    ns = Namespace(unknowns=("u", "rho", "v1"))
    assert ns.latex_name(ns.field("u", "xx")) == "u_{xx}"
    assert ns.latex_name(ns.field("rho", "xt")) == r"\rho_{tx}"
    assert ns.latex_name(ns.field("rho")) == r"\rho"
    assert ns.latex_name(ns.field("v1", "t")) == r"\mathrm{v1}_{t}"
    assert ns.latex_name(ns.coordinate("t")) == "t"


# -- printing --------------------------------------------------------------------------
ROUND_TRIPS = [
    ("nu*u_xx - u*u_x", "nu*u_xx - u*u_x", r"\nu u_{xx} - u u_{x}"),
    ("-x^2", "-x^2", "- x^{2}"),
    ("(-x)^t", "(-x)^t", r"\left(- x\right)^{t}"),
    ("abs(u)^(3/2)", "abs(u)^(3/2)", r"\left|{u}\right|^{\frac{3}{2}}"),
    ("2^(1/3)*x", "2^(1/3)*x", r"\sqrt[3]{2} x"),
    ("1/sqrt(x)", "1/sqrt(x)", r"\frac{1}{\sqrt{x}}"),
    ("x^-2", "x^(-2)", r"\frac{1}{x^{2}}"),
    ("exp(-t)*sin(pi*x)", "exp(-t)*sin(pi*x)", r"e^{- t} \sin{\left(\pi x \right)}"),
    ("E + log(x)", "log(x) + E", r"\log{\left(x \right)} + e"),
    ("u_xt + 0.25", "u_tx + 1/4", r"u_{tx} + \frac{1}{4}"),
    ("k/(1 + t)^2", "k/(t + 1)^2", r"\frac{k}{\left(t + 1\right)^{2}}"),
    (
        "tanh(x) - cosh(x)*sinh(x) + tan(x)/cos(x)",
        "-sinh(x)*cosh(x) + tanh(x) + tan(x)/cos(x)",
        None,
    ),
]


@pytest.mark.parametrize(("text", "printed", "latex"), ROUND_TRIPS, ids=[r[0] for r in ROUND_TRIPS])
def test_printing_round_trip(text: str, printed: str, latex: str | None) -> None:
    expr = parse(text)
    assert to_text(expr, NS) == printed
    assert parse(printed) == expr
    if latex is not None:
        assert to_latex(expr, NS) == latex


def test_printing_does_not_change_the_expression() -> None:
    expr = parse("nu*u_xx")
    to_text(expr, NS)
    to_latex(expr, NS)
    assert {s.name for s in expr.free_symbols} == {"_p0", "_f0_xx"}


# -- time functions --------------------------------------------------------------------
def test_time_function() -> None:
    f = parse_time_function("2/(1.25 - t)")
    t_symbol = time_symbol()
    assert t_symbol == Namespace(coordinates=("t",)).coordinate("t") == NS.coordinate("t")
    assert f == 2 / (sympy.Rational(5, 4) - t_symbol)
    assert f.free_symbols == {t_symbol}
    g = parse_time_function("C/(T - t)^p", {"C": 2, "T": 1.25, "p": 0.5})
    assert g == 2 / sympy.sqrt(sympy.Rational(5, 4) - t_symbol)
    assert g.free_symbols == {t_symbol}
    assert parse_time_function("a", {"a": 0.1}) == sympy.Rational(1, 10)
    assert parse_time_function("exp(-t)") == sympy.exp(-t_symbol)


def test_time_function_errors() -> None:
    expect_error(lambda: parse_time_function("u"), "expression_unknown_name", 0)
    expect_error(lambda: parse_time_function("x*t"), "expression_unknown_name", 0)
    expect_error(lambda: parse_time_function("t'"), "expression_bad_derivative", 0)
    expect_error(lambda: parse_time_function("a'", {"a": 1.0}), "expression_bad_derivative", 0)
    expect_error(lambda: parse_time_function("a", {"sin": 1.0}), "invalid_parameter_name", None)
    expect_error(
        lambda: parse_time_function("a", {"a": float("nan")}),
        "invalid_parameter_value",
        None,
        "finite",
    )
    expect_error(
        lambda: parse_time_function("a", {"a": float("inf")}), "invalid_parameter_value", None
    )
    expect_error(lambda: parse_time_function("a", {"a": True}), "invalid_parameter_value", None)  # type: ignore[dict-item]
    expect_error(lambda: parse_time_function("a", {"a": "1"}), "invalid_parameter_value", None)  # type: ignore[dict-item]
    # Values are substituted while parsing, so the cost guards see them.
    expect_error(
        lambda: parse_time_function("(a^64)^64", {"a": 1e300}), "expression_number_too_large", 2
    )


# -- the error type --------------------------------------------------------------------
def test_error_type() -> None:
    err = ExpressionError("expression_syntax", "bad thing", 3, "x+*")
    assert isinstance(err, ValueError)
    assert str(err) == "bad thing at position 3"
    assert str(ExpressionError("expression_syntax", "bad thing")) == "bad thing"
    copy = pickle.loads(pickle.dumps(err))
    assert (copy.code, copy.reason, copy.position, copy.text) == (
        "expression_syntax",
        "bad thing",
        3,
        "x+*",
    )
    assert err.as_dict() == {
        "code": "expression_syntax",
        "reason": "bad thing",
        "position": 3,
        "message": "bad thing at position 3",
    }
    assert re.fullmatch(
        r"ExpressionError\('expression_syntax', 'bad thing', position=3\)", repr(err)
    )


def test_limits_defaults() -> None:
    limits = ExpressionLimits()
    assert limits == DEFAULT_LIMITS
    assert (
        limits.max_length,
        limits.max_depth,
        limits.max_nodes,
        limits.max_exponent,
        limits.max_integer_digits,
        limits.max_derivative_order,
        limits.max_radical_digits,
        limits.max_power_digits,
    ) == (2000, 48, 1500, 64, 40, 4, 24, 2560)


#: One trigger per error code; the test below checks that the table covers them all.
CODE_EXAMPLES: dict[str, Any] = {
    "expression_not_text": lambda: parse(None),  # type: ignore[arg-type]
    "expression_empty": lambda: parse(""),
    "expression_too_long": lambda: parse("x" * 2001),
    "expression_bad_character": lambda: parse("\x1b"),
    "expression_syntax": lambda: parse("x+"),
    "expression_missing_operator": lambda: parse("2x"),
    "expression_bad_call": lambda: parse("sin()"),
    "expression_unknown_name": lambda: parse("w"),
    "expression_bad_derivative": lambda: parse("u_q"),
    "expression_too_deep": lambda: parse("(" * 60 + "x" + ")" * 60),
    "expression_too_large": lambda: parse("+".join("x" * 800)),
    "expression_number_too_large": lambda: parse("1" * 50),
    "expression_exponent_too_large": lambda: parse("x^100"),
    "expression_undefined": lambda: parse("1/0"),
    "expression_not_real": lambda: parse("sqrt(-2)"),
    "expression_not_equation": lambda: parse_equation("x", NS),
    "expression_unexpected_equation": lambda: parse("x=t"),
    "expression_unsupported": lambda: to_text(object(), NS),
    "expression_foreign_symbol": lambda: to_text(sympy.Symbol("x"), NS),
    "invalid_parameter_name": lambda: Namespace(parameters=("sin",)),
    "invalid_parameter_value": lambda: parse_time_function("a", {"a": float("nan")}),
    "invalid_unknown_name": lambda: Namespace(unknowns=("u_x",)),
    "invalid_namespace": lambda: Namespace(coordinates=("w",)),
    "invalid_limits": lambda: ExpressionLimits(max_length=0),
}


def test_every_error_code_has_a_trigger() -> None:
    assert set(CODE_EXAMPLES) == ERROR_CODES


@pytest.mark.parametrize("code", sorted(CODE_EXAMPLES))
def test_error_code_trigger(code: str) -> None:
    with pytest.raises(ExpressionError) as info:
        CODE_EXAMPLES[code]()
    assert info.value.code == code
