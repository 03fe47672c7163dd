"""Coverage-guided fuzzing of the expression grammar (boundsvc/expr).

Every input is decoded as UTF-8 (with ``surrogateescape``, so every byte string is some text)
and given to ``parse_expression``, ``parse_equation`` and ``parse_time_function``.  Each must
return a sympy object or raise ``ExpressionError`` within the budget; a parsed result may only
contain our internal symbols (``_c_``, ``_p``, ``_f``: never a name from the text).  String
evaluators (sympify, parse_expr, eval, exec) are replaced by tripwires first, so any call to
one is a crash.  Run: ``make fuzz`` (FUZZ_SECONDS=60) or ``python -m fuzz.fuzz_expr``.
"""

from __future__ import annotations

import builtins
from typing import Any

from fuzz._common import run

_PARSERS: dict[str, Any] = {}


class Evaluated(AssertionError):
    """A string evaluator was called with text."""


def _tripwires() -> None:
    import sympy
    import sympy.parsing.sympy_parser as sympy_parser

    def tripwire(name: str, original: Any, only_text: bool) -> Any:
        def forbidden(*args: Any, **kwargs: Any) -> Any:
            if only_text and not (args and isinstance(args[0], str)):
                return original(*args, **kwargs)  # imports run exec on code objects
            raise Evaluated(f"{name} called")

        return forbidden

    for owner, name in (
        (sympy_parser, "parse_expr"),
        (sympy_parser, "eval_expr"),
        (sympy, "sympify"),
        (sympy, "parse_expr"),
        (sympy, "lambdify"),
    ):
        setattr(owner, name, tripwire(name, getattr(owner, name), only_text=False))
    for name in ("eval", "exec"):
        setattr(builtins, name, tripwire(name, getattr(builtins, name), only_text=True))


def setup(tripwires: bool = True) -> None:
    """Import the grammar; ``tripwires=False`` leaves sympy and builtins alone (the
    regression test uses its own scoped guard instead of this process-wide patch)."""
    import boundsvc.expr as expr

    _PARSERS.update(
        module=expr,
        namespace=expr.Namespace(
            coordinates=("t", "x", "y"), unknowns=("u",), parameters=("nu", "k")
        ),
    )
    if tripwires:
        _tripwires()


def check(data: bytes) -> None:
    expr = _PARSERS["module"]
    namespace = _PARSERS["namespace"]
    text = data.decode("utf-8", "surrogateescape")
    for call in (
        lambda: expr.parse_expression(text, namespace),
        lambda: expr.parse_equation(text, namespace),
        lambda: expr.parse_time_function(text, {"nu": 0.5}),
    ):
        try:
            result = call()
        except expr.ExpressionError as err:
            assert err.code in expr.ERROR_CODES, err.code
            continue
        parts = result if isinstance(result, tuple) else (result,)
        for part in parts:
            for symbol in part.free_symbols:
                assert symbol.name.startswith(("_c_", "_p", "_f")), (text, symbol.name)


if __name__ == "__main__":
    run("expr", check, setup)
