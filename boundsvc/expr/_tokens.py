"""Tokeniser: untrusted text -> a short list of tokens, or an :class:`ExpressionError`.

The tokeniser is the first line of defence: it enforces the length limit before looking
at the text, rejects every character outside printable ASCII (so bidi overrides,
zero-width spaces and look-alike letters never reach the parser), turns number literals
into exact fractions after checking their size, and stops as soon as the token limit is
exceeded.
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass
from fractions import Fraction
from typing import Literal

from boundsvc.expr._errors import ExpressionError
from boundsvc.expr._limits import ExpressionLimits

__all__ = ["Token", "TokenKind", "excerpt", "tokenize"]

TokenKind = Literal[
    "number", "name", "op", "lparen", "rparen", "comma", "equals", "derivative", "end"
]

# [0-9] rather than \d: \d also matches non-ASCII digits (which never get this far, but the
# regexes should not depend on that).
_NUMBER = re.compile(r"(?:([0-9]+)(?:\.([0-9]*))?|\.([0-9]+))(?:[eE]([+-]?[0-9]+))?")
_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*")
# ``(f(u))_x``: a derivative suffix directly after a closing parenthesis (letters only)
_SUFFIX = re.compile(r"_([A-Za-z]+)")
_SINGLE: dict[str, TokenKind] = {
    "+": "op",
    "-": "op",
    "/": "op",
    "^": "op",
    "(": "lparen",
    ")": "rparen",
    ",": "comma",
}
# A decimal exponent with more than this many digits is absurd; reject it before int().
_MAX_EXPONENT_CHARS = 9
_CONTROL_NAMES = {
    0x00: "NUL",
    0x09: "TAB",
    0x0A: "LINE FEED",
    0x0D: "CARRIAGE RETURN",
    0x1B: "ESCAPE",
    0x7F: "DELETE",
}
_UNUSED_ASCII_HINTS = {
    "[": "use parentheses ( ) for grouping",
    "]": "use parentheses ( ) for grouping",
    "{": "use parentheses ( ) for grouping",
    "}": "use parentheses ( ) for grouping",
    "!": "factorials and negation are not supported",
    "<": "comparisons are not supported",
    ">": "comparisons are not supported",
    ";": "write exactly one expression",
    "\\": "LaTeX input is not supported",
}


@dataclass(frozen=True, slots=True)
class Token:
    """One token of an expression text.

    Attributes
    ----------
    kind : TokenKind
        Token class.
    text : str
        The characters of the token as written (``"**"`` and ``"^"`` stay distinct here).
    position : int
        0-based offset of the first character in the source text.
    value : Fraction or None
        Exact value of a number literal.
    primes : int
        Number of ``'`` directly after a name (``y''`` -> 2).
    """

    kind: TokenKind
    text: str
    position: int
    value: Fraction | None = None
    primes: int = 0

    def describe(self) -> str:
        """Name the token for an error message, e.g. ``'x'`` or ``the end of the text``."""
        if self.kind == "end":
            return "the end of the text"
        return "'" + excerpt(self.text + "'" * self.primes) + "'"


def excerpt(text: str, limit: int = 24) -> str:
    """Shorten ``text`` for an error message (messages must stay short)."""
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _character_name(char: str) -> str:
    code = ord(char)
    name = _CONTROL_NAMES.get(code) or unicodedata.name(char, "")
    if not name:
        name = "control character" if unicodedata.category(char).startswith("C") else "character"
    # Never echo the character itself: it may be invisible or reorder the message text.
    return f"U+{code:04X} ({name})"


def _check_characters(text: str) -> None:
    for position, char in enumerate(text):
        if char == "\t" or " " <= char <= "~":
            continue
        raise ExpressionError(
            "expression_bad_character",
            f"character {_character_name(char)} is not allowed; expressions use printable "
            "ASCII characters, spaces and tabs only",
            position,
            text,
        )


def _number(match: re.Match[str], limits: ExpressionLimits, text: str) -> Fraction:
    """Exact value of a number literal, after checking its size from the digit counts."""
    integer_part, fraction_a, fraction_b, exponent_text = match.groups()
    fraction_part = fraction_a or fraction_b or ""
    digits = ((integer_part or "") + fraction_part).lstrip("0")
    if not digits:
        return Fraction(0)  # 0e999999 is just zero; no power of ten is ever computed.
    literal = match.group(0)
    exponent = 0
    if exponent_text is not None:
        magnitude = exponent_text.lstrip("+-").lstrip("0")
        if len(magnitude) > _MAX_EXPONENT_CHARS:
            raise ExpressionError(
                "expression_number_too_large",
                f"number {excerpt(literal)!r} has an exponent with {len(magnitude)} digits; "
                f"written out, a number may have at most {limits.max_integer_digits} digits "
                "before and after the decimal point",
                match.start(),
                text,
            )
        exponent = int(exponent_text)
    shift = exponent - len(fraction_part)  # value = int(digits) * 10**shift
    before = max(0, len(digits) + shift)
    after = max(0, -shift)
    for count, where in ((before, "before"), (after, "after")):
        if count > limits.max_integer_digits:
            raise ExpressionError(
                "expression_number_too_large",
                f"number {excerpt(literal)!r} has {count} digits {where} the decimal point "
                f"when written out; at most {limits.max_integer_digits} are allowed",
                match.start(),
                text,
            )
    if shift >= 0:
        return Fraction(int(digits) * 10**shift)
    return Fraction(int(digits), 10**-shift)


def _unexpected(char: str, position: int, text: str) -> ExpressionError:
    if char == "_":
        return ExpressionError(
            "expression_syntax", "a name must start with a letter, not '_'", position, text
        )
    if char == ".":
        return ExpressionError(
            "expression_syntax",
            "a decimal point must be followed by a digit or follow one, as in 0.5 or .5 or 5.",
            position,
            text,
        )
    if char == "'":
        return ExpressionError(
            "expression_syntax",
            "a prime (') must directly follow the name of an unknown, as in y'",
            position,
            text,
        )
    hint = _UNUSED_ASCII_HINTS.get(char, "it is not part of the expression grammar")
    return ExpressionError(
        "expression_bad_character", f"character {char!r} is not allowed: {hint}", position, text
    )


def tokenize(text: str, limits: ExpressionLimits) -> list[Token]:
    """Split ``text`` into tokens, ending with a ``"end"`` token.

    Parameters
    ----------
    text : str
        Untrusted source text.
    limits : ExpressionLimits
        ``max_length``, ``max_nodes`` (token count) and ``max_integer_digits`` apply.

    Returns
    -------
    list of Token

    Raises
    ------
    ExpressionError
        ``expression_not_text``, ``expression_too_long``, ``expression_bad_character``,
        ``expression_syntax``, ``expression_number_too_large``, ``expression_too_large``
        or ``expression_empty``.
    """
    if not isinstance(text, str):
        raise ExpressionError(
            "expression_not_text", f"expected the expression as text, got {type(text).__name__}"
        )
    if len(text) > limits.max_length:
        # Checked before anything looks at the characters: the cost of a huge input
        # must not depend on its content.
        raise ExpressionError(
            "expression_too_long",
            f"the text has {len(text)} characters; at most {limits.max_length} are allowed",
            limits.max_length,
            text,
        )
    _check_characters(text)
    tokens: list[Token] = []
    index = 0
    length = len(text)
    while index < length:
        char = text[index]
        if char in " \t":
            index += 1
            continue
        token: Token
        if char.isdigit() or (char == "." and index + 1 < length and text[index + 1].isdigit()):
            match = _NUMBER.match(text, index)
            assert match is not None  # a digit, or '.' + digit, always matches
            token = Token("number", match.group(0), index, value=_number(match, limits, text))
            index = match.end()
        elif char.isalpha():
            match = _NAME.match(text, index)
            assert match is not None
            end = match.end()
            primes = 0
            while end < length and text[end] == "'":
                primes += 1
                end += 1
            token = Token("name", match.group(0), index, primes=primes)
            index = end
        elif char == "*":
            width = 2 if text.startswith("**", index) else 1
            token = Token("op", text[index : index + width], index)
            index += width
        elif char == "=":
            if text.startswith("==", index):
                raise ExpressionError(
                    "expression_syntax",
                    "'==' is a comparison; write an equation with a single '='",
                    index,
                    text,
                )
            token = Token("equals", "=", index)
            index += 1
        elif char == "_" and tokens and tokens[-1].kind == "rparen" and _SUFFIX.match(text, index):
            match = _SUFFIX.match(text, index)
            assert match is not None
            token = Token("derivative", match.group(1), index)
            index = match.end()
        elif char in _SINGLE:
            token = Token(_SINGLE[char], char, index)
            index += 1
        else:
            raise _unexpected(char, index, text)
        tokens.append(token)
        if len(tokens) > limits.max_nodes:
            raise ExpressionError(
                "expression_too_large",
                f"the text has more than {limits.max_nodes} tokens (numbers, names, operators "
                "and parentheses)",
                token.position,
                text,
            )
    if not tokens:
        raise ExpressionError("expression_empty", "the expression is empty", 0, text)
    tokens.append(Token("end", "", length))
    return tokens
