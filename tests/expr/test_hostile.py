"""Regression corpus of hostile inputs: each must fail fast with an ExpressionError.

Every entry is ``(text, expected code)``.  Besides the code, each test checks that the
failure is quick (the parser runs inside request handlers, where a slow parse is a
denial of service) and that no string-evaluating function is ever called.
"""

from __future__ import annotations

import ast
import builtins
import contextlib
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
import sympy
import sympy.parsing.sympy_parser as sympy_parser

from boundsvc.expr import (
    ExpressionError,
    ExpressionLimits,
    Namespace,
    parse_equation,
    parse_expression,
    parse_time_function,
    to_latex,
    to_text,
)

NS = Namespace(coordinates=("t", "x"), unknowns=("u",), parameters=("nu", "k"))
#: Generous enough that only the parser's own defences (depth, guards) stop the input.
HUGE = ExpressionLimits(max_length=10**6, max_nodes=10**6)
BUDGET_SECONDS = 1.0

CORPUS: list[tuple[str, str]] = [
    # Python injection attempts.
    ("__import__('os').system('x')", "expression_syntax"),
    ("().__class__.__bases__", "expression_syntax"),
    ("lambda: 0", "expression_bad_character"),
    ("u.__class__", "expression_syntax"),
    ("exec('1')", "expression_syntax"),
    ("eval", "expression_unknown_name"),
    ("open('f')", "expression_syntax"),
    ("x if t else u", "expression_missing_operator"),
    ("[1,2]", "expression_bad_character"),
    ("{}", "expression_bad_character"),
    ("u[0]", "expression_bad_character"),
    ("x; import os", "expression_bad_character"),
    ("Symbol('x')", "expression_syntax"),
    ("S('x')", "expression_syntax"),
    ('"x"', "expression_bad_character"),
    ("x @ t", "expression_bad_character"),
    ("x % t", "expression_bad_character"),
    ("x // t", "expression_syntax"),
    ("x << t", "expression_bad_character"),
    ("not x", "expression_unknown_name"),
    ("u.subs(x, 1)", "expression_syntax"),
    ("sin.__globals__", "expression_syntax"),
    ("I", "expression_unknown_name"),
    ("oo", "expression_unknown_name"),
    ("zoo*x", "expression_unknown_name"),
    ("nan", "expression_unknown_name"),
    ("Integral(x, x)", "expression_unknown_name"),
    ("_c_t", "expression_syntax"),
    ("_p0", "expression_syntax"),
    ("_f0_xx", "expression_syntax"),
    # Numbers and powers that would make sympy compute forever.
    ("9^9^9^9", "expression_exponent_too_large"),
    ("9**9**9**9", "expression_exponent_too_large"),
    ("10^100000", "expression_exponent_too_large"),
    ("2**(2**100)", "expression_exponent_too_large"),
    ("x^(10^40)", "expression_exponent_too_large"),
    ("x^(1/1000)", "expression_exponent_too_large"),
    ("1" * 1000, "expression_number_too_large"),
    ("1e999999", "expression_number_too_large"),
    ("1e-999999", "expression_number_too_large"),
    ("1E+99999999999999999999", "expression_number_too_large"),
    ("0." + "0" * 100 + "1", "expression_number_too_large"),
    ("((2^64)^64)^64", "expression_number_too_large"),
    ("(2^64*x)^64^2", "expression_exponent_too_large"),
    ("((x^64)^64)^64", "expression_exponent_too_large"),
    ("(2^x)^(10^40/x)", "expression_exponent_too_large"),
    ("abs(2^x)^(10^40/x)", "expression_exponent_too_large"),
    ("exp(10^40*log(2))", "expression_exponent_too_large"),
    ("E^(10^40*log(2))", "expression_exponent_too_large"),
    ("exp(x*log(2))^(10^40/x)", "expression_exponent_too_large"),
    ("exp(10^5*(log(2)+log(3)))", "expression_exponent_too_large"),
    ("exp(x)*exp(4000*log(2)-x)", "expression_number_too_large"),
    ("exp(log(x)*10^6)", "expression_exponent_too_large"),
    ("*".join(["(2^64)^40"] * 4), "expression_number_too_large"),
    # Non-integer powers of large numbers make sympy factorise them (seconds each).
    ("3873816344366618365533914464424214950233^(2/63)", "expression_number_too_large"),
    ("sqrt(1000000000000000000000000000039)", "expression_number_too_large"),
    (
        "*".join(f"sqrt({p})" for p in (999983, 999979, 999961, 999959, 999953)),
        "expression_number_too_large",
    ),
    ("exp(log(1000000000000000000000000000039)/2)", "expression_number_too_large"),
    # Undefined or complex values.
    ("1/0", "expression_undefined"),
    ("x/(t-t)", "expression_undefined"),
    ("log(0)", "expression_undefined"),
    ("tan(pi/2)", "expression_undefined"),
    ("0^-1", "expression_undefined"),
    ("sqrt(-1)", "expression_not_real"),
    ("log(-1)", "expression_not_real"),
    ("(-1)^(1/2)", "expression_not_real"),
    ("(-8)^(1/3)", "expression_not_real"),
    # Structure.
    ("(" * 10**4 + "x" + ")" * 10**4, "expression_too_long"),
    ("(" * 500 + "x", "expression_too_deep"),
    ("((((x)))", "expression_syntax"),
    ("(((x))))", "expression_syntax"),
    ("+".join(["x"] * 10**5), "expression_too_long"),
    ("+".join(["x"] * 800), "expression_too_large"),
    ("-" * 1000 + "x", "expression_too_deep"),
    ("2^" * 700 + "2", "expression_too_deep"),
    ("sin(x, t)", "expression_bad_call"),
    ("sin()", "expression_bad_call"),
    ("sin", "expression_bad_call"),
    ("u_q", "expression_bad_derivative"),
    ("u_xxxxx", "expression_bad_derivative"),
    ("u_xx''''", "expression_bad_derivative"),
    ("u_", "expression_bad_derivative"),
    ("u__x", "expression_bad_derivative"),
    ("x'", "expression_bad_derivative"),
    ("y", "expression_unknown_name"),
    ("w", "expression_unknown_name"),
    ("x ==t", "expression_syntax"),
    ("a=b=c", "expression_unknown_name"),
    ("x=t", "expression_unexpected_equation"),
    ("2x", "expression_missing_operator"),
    ("x(1+t)", "expression_missing_operator"),
    ("", "expression_empty"),
    # Characters.
    ("\x00", "expression_bad_character"),
    ("x\x00+t", "expression_bad_character"),
    ("x\x1b[31m", "expression_bad_character"),
    ("x\x7f", "expression_bad_character"),
    ("x\r\n", "expression_bad_character"),
    ("x\u202e+t", "expression_bad_character"),
    ("x\u2066+t\u2069", "expression_bad_character"),
    ("x\u200b+t", "expression_bad_character"),
    ("\ufeffx", "expression_bad_character"),
    ("ｘ+ｔ", "expression_bad_character"),
    ("х", "expression_bad_character"),  # Cyrillic ha, looks like x
    ("x\u00a0+t", "expression_bad_character"),
    ("x−t", "expression_bad_character"),  # U+2212 MINUS SIGN
    ("2×x", "expression_bad_character"),
    ("\U0001f600", "expression_bad_character"),
    ("\udcff", "expression_bad_character"),  # lone surrogate
    ("٣", "expression_bad_character"),  # Arabic-Indic digit three
]


@contextlib.contextmanager
def no_string_evaluation() -> Iterator[None]:
    """Make every string-evaluating entry point fail loudly while the block runs.

    ``sympify`` of a string always goes through ``sympy.parsing.sympy_parser``
    (``parse_expr`` -> ``stringify_expr``/``eval_expr``), looked up at call time, so
    patching that module covers sympy's internal uses too; the top-level names cover
    direct calls; ``eval``/``exec``/``compile`` cover Python itself.  The patch is
    scoped to the block (not the test) because pytest itself compiles code when it
    reports a failure.
    """
    calls: list[str] = []

    def forbid(name: str, original: Any, only_text: bool) -> Any:
        def forbidden(*args: Any, **kwargs: Any) -> Any:
            # Python's import machinery runs exec()/compile() on code objects and bytes
            # (sympy imports submodules lazily); only text can come from a user.
            if only_text and not (args and isinstance(args[0], str)):
                return original(*args, **kwargs)
            calls.append(name)
            raise AssertionError(f"{name} must never be called")

        return forbidden

    targets: list[tuple[Any, str]] = [
        *((sympy_parser, name) for name in ("parse_expr", "stringify_expr", "eval_expr")),
        *((sympy, name) for name in ("sympify", "parse_expr", "lambdify")),
        *((builtins, name) for name in ("eval", "exec", "compile")),
    ]
    saved = [(owner, name, getattr(owner, name)) for owner, name in targets]
    for owner, name, original in saved:
        label = f"{getattr(owner, '__name__', owner)}.{name}"
        setattr(owner, name, forbid(label, original, only_text=owner is builtins))
    try:
        yield
    finally:
        for owner, name, original in saved:
            setattr(owner, name, original)
    # Checked after restoring: an ExpressionError wrapping the AssertionError must not
    # hide a forbidden call.
    assert calls == [], calls


def _timed(call: Any) -> tuple[Any, float]:
    """Run ``call`` with string evaluation forbidden; return (result or error, seconds)."""
    start = time.perf_counter()
    with no_string_evaluation():
        try:
            result: Any = call()
        except ExpressionError as err:
            result = err
    return result, time.perf_counter() - start


@pytest.mark.parametrize(
    ("text", "code"), CORPUS, ids=[f"{i}:{c}" for i, (_, c) in enumerate(CORPUS)]
)
def test_hostile_input_fails_fast(text: str, code: str) -> None:
    result, seconds = _timed(lambda: parse_expression(text, NS))
    assert isinstance(result, ExpressionError), f"parsed to {result!r}"
    assert result.code == code, str(result)
    assert seconds < BUDGET_SECONDS, f"took {seconds:.2f}s"
    assert result.position is None or 0 <= result.position <= len(text)
    # The other entry points share the machinery and must be just as strict.
    for call in (
        lambda: parse_equation(text + "=0", NS),
        lambda: parse_time_function(text),
    ):
        other, seconds = _timed(call)
        assert isinstance(other, ExpressionError | sympy.Basic | tuple)
        assert seconds < BUDGET_SECONDS


@pytest.mark.parametrize(
    ("text", "code"),
    [
        ("(" * 10**4 + "x" + ")" * 10**4, "expression_too_deep"),
        ("(" * 10**4 + "x", "expression_too_deep"),
        ("-" * 10**4 + "x", "expression_too_deep"),
        ("sin(" * 10**4 + "x" + ")" * 10**4, "expression_too_deep"),
        ("x^" * 10**4 + "x", "expression_too_deep"),
        (
            "*".join(f"sqrt({10**6 + 3 + 2 * i})" for i in range(2000)),
            "expression_number_too_large",
        ),
    ],
    ids=["parens", "unbalanced", "signs", "calls", "powers", "radicals"],
)
def test_depth_defence_without_the_length_limit(text: str, code: str) -> None:
    """With the length and token limits lifted, nesting still fails fast, never RecursionError."""
    result, seconds = _timed(lambda: parse_expression(text, NS, HUGE))
    assert isinstance(result, ExpressionError)
    assert result.code == code
    assert seconds < 2 * BUDGET_SECONDS


def test_legitimate_inputs_under_guard() -> None:
    """The patched functions are really unused on the success paths as well."""
    with no_string_evaluation():
        _legitimate_inputs()


def _legitimate_inputs() -> None:
    _, rhs = parse_equation("u_t = nu*u_xx - u*u_x + k*sin(pi*x)*exp(-t)", NS)
    assert "nu*u_xx" in to_text(rhs, NS)
    assert "u_{xx}" in to_latex(rhs, NS)
    assert parse_time_function("2/(T - t)", {"T": 1.25}).free_symbols
    assert (
        parse_expression("sqrt(2)*x^(1/3) + (2^64)^64/(2^64)^64 + 2000*sqrt(999983)", NS)
        is not None
    )
    assert parse_expression("*".join(["sin(pi/12)"] * 50), NS) is not None


def test_radicals_of_small_numbers_stay_cheap() -> None:
    text = "*".join(["sqrt(2)", "sqrt(3)", "sqrt(5)", "sqrt(7)", "3^(1/3)"] * 30)
    result, seconds = _timed(lambda: parse_expression(text, NS))
    assert isinstance(result, sympy.Basic)
    assert seconds < BUDGET_SECONDS


# -- static checks on the package source --------------------------------------------------
PACKAGE = Path(__file__).resolve().parents[2] / "boundsvc" / "expr"
FORBIDDEN_CALLS = {
    "eval",
    "exec",
    "compile",
    "__import__",
    "sympify",
    "parse_expr",
    "lambdify",
    "S",
    "simplify",
    "nsimplify",
    "parse_latex",
}


def _calls() -> Iterator[tuple[str, ast.Call]]:
    sources = sorted(PACKAGE.glob("*.py"))
    assert len(sources) >= 5
    for path in sources:
        for node in ast.walk(ast.parse(path.read_text(), str(path))):
            if isinstance(node, ast.Call):
                func = node.func
                if isinstance(func, ast.Attribute):
                    owner = getattr(func.value, "id", "")
                    # re.compile builds a regex; it evaluates nothing.
                    name = "re.compile" if owner == "re" else func.attr
                else:
                    name = getattr(func, "id", "")
                yield f"{path.name}:{node.lineno}:{name}", node


def test_package_calls_no_string_evaluator() -> None:
    bad = [where for where, node in _calls() if where.rsplit(":", 1)[1] in FORBIDDEN_CALLS]
    assert bad == []


def test_symbols_are_only_created_with_internal_names() -> None:
    """Every ``Symbol(...)`` call's name starts with a literal ``_``: never raw user text."""
    for where, node in _calls():
        name = where.rsplit(":", 1)[1]
        if name not in ("Symbol", "Dummy", "symbols", "Function"):
            continue
        assert name == "Symbol", where
        first = node.args[0]
        if isinstance(first, ast.JoinedStr):
            first = first.values[0]
        elif isinstance(first, ast.BinOp):
            first = first.left
        assert isinstance(first, ast.Constant), where
        assert str(first.value).startswith("_"), where


def test_rationals_are_built_from_integers() -> None:
    """``Rational(str)`` parses its argument; every call must pass two integers."""
    for where, node in _calls():
        if where.endswith(":Rational"):
            assert len(node.args) == 2, where
