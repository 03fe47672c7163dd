"""The single exception type of the expression grammar and its stable error codes."""

from __future__ import annotations

from typing import Any, Literal, get_args

__all__ = ["ERROR_CODES", "ExpressionError", "ExpressionErrorCode"]

ExpressionErrorCode = Literal[
    "expression_not_text",
    "expression_empty",
    "expression_too_long",
    "expression_bad_character",
    "expression_syntax",
    "expression_missing_operator",
    "expression_bad_call",
    "expression_unknown_name",
    "expression_bad_derivative",
    "expression_too_deep",
    "expression_too_large",
    "expression_number_too_large",
    "expression_exponent_too_large",
    "expression_undefined",
    "expression_not_real",
    "expression_not_equation",
    "expression_unexpected_equation",
    "expression_unsupported",
    "expression_foreign_symbol",
    "invalid_parameter_name",
    "invalid_parameter_value",
    "invalid_unknown_name",
    "invalid_namespace",
    "invalid_limits",
]
"""Every code :class:`ExpressionError` can carry (documented in ``docs/expressions.md``)."""

ERROR_CODES: frozenset[str] = frozenset(get_args(ExpressionErrorCode))


class ExpressionError(ValueError):
    """A problem with an expression text, a namespace or the limits.

    Every error raised by :mod:`boundsvc.expr` is an ``ExpressionError``; foreign
    exceptions (from sympy, arithmetic overflow, ...) are wrapped into one, so callers
    need exactly one ``except`` clause and can map ``code`` to an HTTP problem type.

    Parameters
    ----------
    code : ExpressionErrorCode
        Stable machine-readable code.
    reason : str
        Human sentence naming what was found and what was expected.
    position : int or None
        0-based character offset in ``text`` where the problem was found.
    text : str or None
        The source text, when the error concerns one.

    Notes
    -----
    ``str(err)`` is ``"<reason> at position <n>"`` (just ``reason`` when there is no
    position).  All four values are passed to ``ValueError.__init__`` so the exception
    pickles and unpickles unchanged (pytest-xdist, multiprocessing).
    """

    code: ExpressionErrorCode
    reason: str
    position: int | None
    text: str | None

    def __init__(
        self,
        code: ExpressionErrorCode,
        reason: str,
        position: int | None = None,
        text: str | None = None,
    ) -> None:
        super().__init__(code, reason, position, text)
        self.code = code
        self.reason = reason
        self.position = position
        self.text = text

    def __str__(self) -> str:
        if self.position is None:
            return self.reason
        return f"{self.reason} at position {self.position}"

    def __repr__(self) -> str:
        return f"ExpressionError({self.code!r}, {self.reason!r}, position={self.position!r})"

    def as_dict(self) -> dict[str, Any]:
        """Return ``code``, ``reason``, ``position`` and ``message`` for a JSON error body.

        Returns
        -------
        dict
            JSON-serialisable; the source text is left out on purpose (it can be long and
            the client already has it).
        """
        return {
            "code": self.code,
            "reason": self.reason,
            "position": self.position,
            "message": str(self),
        }
