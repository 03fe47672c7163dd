"""How constants are shown: text and LaTeX that a reader can check against the derivation."""

from __future__ import annotations

import pytest

from api_schemas import ProblemSpec
from boundsvc.certify import derive


def _rate(equation: str, parameters: dict[str, float] | None = None) -> tuple[str, str]:
    problem = ProblemSpec.model_validate(
        {
            "equation": equation,
            "space": {"x": [0, 1]},
            "time": [0, 1],
            "boundary": "dirichlet",
            "parameters": parameters or {},
        }
    )
    rate = next(c for c in derive(problem).constants() if c.symbol == "a(t)")
    return rate.expression, rate.latex


@pytest.mark.parametrize(
    ("equation", "parameters", "text", "latex"),
    [
        # no reaction term: the rate is the Young weight alone (never "lambda - 2*0")
        ("u_t = 0.1*u_xx", None, "lambda", r"\lambda"),
        # u_t = k u_xx - u: reaction c = 1 gives lambda - 2
        ("u_t = 0.1*u_xx - u", None, "lambda - 2", r"\lambda - 2"),
        # a source term (c = -1/2) increases the rate
        ("u_t = 0.1*u_xx + 0.5*u", None, "lambda + 1", r"\lambda + 1"),
        ("u_t = 0.1*u_xx - c*u", {"c": 0.3}, "lambda - 2*c", r"\lambda - 2\,c"),
        (
            "u_t = 0.1*u_xx - (c + 1)*u",
            {"c": 0.3},
            "lambda - 2*(c + 1)",
            r"\lambda - 2\,\left(c + 1\right)",
        ),
    ],
)
def test_linear_rate_display(
    equation: str, parameters: dict[str, float] | None, text: str, latex: str
) -> None:
    assert _rate(equation, parameters) == (text, latex)


def test_conservation_law_rate_latex_uses_readable_symbols() -> None:
    text, latex = _rate("u_t + (u^2/2)_x = 0.01*u_xx")
    assert "S_minus" in text
    assert "plus}" not in latex and "minus}" not in latex
    assert r"f''_{+} S_{-}(t)" in latex and r"\lambda" in latex
