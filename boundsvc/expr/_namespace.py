"""Namespaces: which names an expression may use, and the internal symbols they map to.

Internal symbols are never named after user text.  The scheme, fixed so that any
module can recognise a symbol, is:

========================  ==================================  ======================
what                      internal sympy symbol               example
========================  ==================================  ======================
coordinate ``t x y z``    ``Symbol("_c_<letter>", real=True)``  ``_c_t``
parameter number ``i``    ``Symbol("_p<i>", real=True)``        ``_p0`` for ``nu``
unknown ``i``, derivative ``Symbol("_f<i>_<letters>", real=True)``  ``_f0_`` (u), ``_f0_tx``
========================  ==================================  ======================

``<i>`` is the 0-based declaration index and ``<letters>`` the derivative's coordinate
letters in canonical order (t, x, y, z), so ``u_xt``, ``u_tx`` and ``u_x'`` are the same
symbol ``_f0_tx``.  Two namespaces that declare names in the same order therefore share
symbols; that is intended (symbols carry meaning by position, like a function signature).
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass
from dataclasses import field as dataclass_field
from typing import Any, Literal

import sympy

from boundsvc.expr._errors import ExpressionError, ExpressionErrorCode
from boundsvc.expr._tokens import excerpt
from boundsvc.expr._vocabulary import (
    CONSTANTS,
    COORDINATE_LETTERS,
    FUNCTIONS,
    GREEK_LATEX,
    NAME_HINTS,
    RESERVED_WORDS,
)

__all__ = ["MAX_NAME_LENGTH", "Namespace", "SymbolInfo", "SymbolKind", "time_symbol"]

SymbolKind = Literal["coordinate", "parameter", "field"]

MAX_NAME_LENGTH = 64
"""Longest parameter or unknown name a namespace accepts."""

_MAX_ORDER_CAP = 8
_PARAMETER_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*")
# No '_' in unknown names: the first '_' separates the unknown from its derivative.
_UNKNOWN_NAME = re.compile(r"[A-Za-z][A-Za-z0-9]*")
_INTERNAL = re.compile(r"_c_([txyz])|_p([0-9]+)|_f([0-9]+)_([txyz]*)")
_ORDER = {letter: index for index, letter in enumerate(COORDINATE_LETTERS)}


def time_symbol() -> Any:
    """The internal symbol of time, ``Symbol("_c_t", real=True)``: the same in every namespace.

    It is the only free symbol :func:`parse_time_function` results can have.
    """
    return sympy.Symbol("_c_t", real=True)


@dataclass(frozen=True, slots=True)
class SymbolInfo:
    """What an internal symbol stands for.

    Attributes
    ----------
    kind : {"coordinate", "parameter", "field"}
    name : str
        The user-facing canonical name: ``"t"``, ``"nu"``, ``"u"``, ``"u_tx"``.
    index : int
        Coordinate position in ``t, x, y, z``; parameter or unknown declaration index.
    unknown : str or None
        For fields, the unknown (``"u"``).
    derivative : tuple of str
        For fields, the canonical derivative letters (``("t", "x")``); ``()`` for ``u``.
    order : int
        ``len(derivative)``.
    """

    kind: SymbolKind
    name: str
    index: int
    unknown: str | None = None
    derivative: tuple[str, ...] = ()
    order: int = 0


def _names(value: Any, what: str) -> tuple[str, ...]:
    if isinstance(value, str) or not isinstance(value, Iterable):
        raise ExpressionError(
            "invalid_namespace", f"{what} must be a sequence of names, not {type(value).__name__}"
        )
    names = tuple(value)
    for name in names:
        if not isinstance(name, str):
            raise ExpressionError(
                "invalid_namespace", f"{what} must be names (str), got {type(name).__name__}"
            )
    return names


def _show(name: str) -> str:
    # ascii() escapes control and bidi characters, so the message cannot be spoofed.
    return excerpt(ascii(name), 40)


def _listing(names: Iterable[str], limit: int = 8) -> str:
    items = list(names)
    if not items:
        return "none"
    shown = ", ".join(items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")


def latex_word(word: str) -> str:
    """LaTeX for a name: Greek letters as macros, one letter italic, else ``\\mathrm``.

    A name with ``_`` gets its first ``_`` rendered as a subscript: ``alpha_1`` ->
    ``\\alpha_{1}``, ``k_max`` -> ``k_{\\mathrm{max}}``.
    """
    head, _, tail = word.partition("_")
    if head in GREEK_LATEX:
        rendered = GREEK_LATEX[head]
    elif len(head) == 1 or head.isdigit():
        rendered = head
    else:
        rendered = "\\mathrm{" + head + "}"
    if tail:
        if tail in GREEK_LATEX:
            sub = GREEK_LATEX[tail]
        elif len(tail) == 1 or tail.isdigit():
            sub = tail
        else:
            sub = "\\mathrm{" + tail.replace("_", "\\_") + "}"
        rendered += "_{" + sub + "}"
    return rendered


@dataclass(frozen=True)
class Namespace:
    """The names one expression may use.

    Parameters
    ----------
    coordinates : sequence of str, default ("t", "x")
        A subset of ``t, x, y, z``; stored in that canonical order.
    unknowns : sequence of str, default ("u",)
        Names of the unknown fields: a letter then letters/digits (no ``_``), not a
        function, constant or coordinate of this namespace.  May be empty.
    parameters : sequence of str, default ()
        Names of scalar parameters: ``[A-Za-z][A-Za-z0-9_]*``, at most 64 characters,
        not a function, constant, coordinate of this namespace or unknown, and not of
        the derivative form ``<unknown>_...``.
    max_derivative_order : int, default 4
        Highest total derivative order an expression may use (0 to 8).

    Raises
    ------
    ExpressionError
        ``invalid_parameter_name``, ``invalid_unknown_name`` or ``invalid_namespace``.

    Notes
    -----
    Coordinate letters a namespace does not use are free for unknowns and parameters,
    so the Lorenz system can be ``Namespace(coordinates=("t",), unknowns=("x","y","z"))``.
    """

    coordinates: tuple[str, ...] = ("t", "x")
    unknowns: tuple[str, ...] = ("u",)
    parameters: tuple[str, ...] = ()
    max_derivative_order: int = 4
    _parameter_index: dict[str, int] = dataclass_field(init=False, repr=False, compare=False)
    _unknown_index: dict[str, int] = dataclass_field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        coordinates = _names(self.coordinates, "coordinates")
        unknowns = _names(self.unknowns, "unknowns")
        parameters = _names(self.parameters, "parameters")
        order = self.max_derivative_order
        if (
            not isinstance(order, int)
            or isinstance(order, bool)
            or not 0 <= order <= _MAX_ORDER_CAP
        ):
            raise ExpressionError(
                "invalid_namespace",
                f"max_derivative_order must be an integer from 0 to {_MAX_ORDER_CAP}, "
                f"got {order!r}",
            )
        for letter in coordinates:
            if letter not in _ORDER:
                raise ExpressionError(
                    "invalid_namespace",
                    f"coordinate {_show(letter)} is not one of t, x, y, z",
                )
        if len(set(coordinates)) != len(coordinates):
            raise ExpressionError("invalid_namespace", "a coordinate is listed twice")
        coordinates = tuple(sorted(coordinates, key=_ORDER.__getitem__))
        taken: set[str] = set(coordinates)
        for name in unknowns:
            self._check_new_name(name, _UNKNOWN_NAME, "invalid_unknown_name", "unknown", taken)
            taken.add(name)
        for name in parameters:
            self._check_new_name(
                name, _PARAMETER_NAME, "invalid_parameter_name", "parameter", taken
            )
            head, sep, _ = name.partition("_")
            if sep and head in unknowns:
                raise ExpressionError(
                    "invalid_parameter_name",
                    f"parameter name {_show(name)} looks like a derivative of the unknown "
                    f"{head!r}; names of the form {head}_... are reserved for derivatives",
                )
            taken.add(name)
        object.__setattr__(self, "coordinates", coordinates)
        object.__setattr__(self, "unknowns", unknowns)
        object.__setattr__(self, "parameters", parameters)
        object.__setattr__(self, "_parameter_index", {n: i for i, n in enumerate(parameters)})
        object.__setattr__(self, "_unknown_index", {n: i for i, n in enumerate(unknowns)})

    @staticmethod
    def _check_new_name(
        name: str,
        pattern: re.Pattern[str],
        code: ExpressionErrorCode,
        what: str,
        taken: set[str],
    ) -> None:
        if not name or len(name) > MAX_NAME_LENGTH or not pattern.fullmatch(name):
            rule = (
                "a letter followed by letters and digits"
                if what == "unknown"
                else "a letter followed by letters, digits and '_'"
            )
            raise ExpressionError(
                code,
                f"{what} name {_show(name)} is not valid: use {rule}, at most "
                f"{MAX_NAME_LENGTH} ASCII characters",
            )
        if name in RESERVED_WORDS:
            raise ExpressionError(
                code, f"{what} name {name!r} is reserved (it is a function or constant)"
            )
        if name in taken:
            raise ExpressionError(
                code, f"{what} name {name!r} is already used by a coordinate, unknown or parameter"
            )

    # -- symbols --------------------------------------------------------------------
    def coordinate(self, name: str) -> Any:
        """Internal symbol of coordinate ``name`` (``"t"`` -> ``_c_t``)."""
        if name not in self.coordinates:
            raise ExpressionError(
                "expression_unknown_name",
                f"{_show(name)} is not a coordinate here; the coordinates are "
                f"{_listing(self.coordinates)}",
            )
        return sympy.Symbol(f"_c_{name}", real=True)

    def parameter(self, name: str) -> Any:
        """Internal symbol of parameter ``name`` (the ``i``-th declared -> ``_p<i>``)."""
        index = self._parameter_index.get(name)
        if index is None:
            raise ExpressionError(
                "expression_unknown_name",
                f"{_show(name)} is not a declared parameter; the parameters are "
                f"{_listing(self.parameters)}",
            )
        return sympy.Symbol(f"_p{index}", real=True)

    def field(self, unknown: str, derivative: Iterable[str] = ()) -> Any:
        """Internal symbol of ``unknown`` or one of its derivatives.

        Parameters
        ----------
        unknown : str
            A declared unknown.
        derivative : iterable of str
            Coordinate letters in any order (``("x", "t")`` or ``"xt"``).

        Returns
        -------
        sympy.Symbol
            ``_f<i>_<letters>`` with the letters in canonical order.

        Raises
        ------
        ExpressionError
            ``expression_unknown_name`` or ``expression_bad_derivative``.
        """
        return self._field(unknown, tuple(derivative), self.max_derivative_order)

    def _field(self, unknown: str, letters: tuple[str, ...], max_order: int) -> Any:
        index = self._unknown_index.get(unknown)
        if index is None:
            raise ExpressionError(
                "expression_unknown_name",
                f"{_show(unknown)} is not an unknown here; the unknowns are "
                f"{_listing(self.unknowns)}",
            )
        for letter in letters:
            if letter not in self.coordinates:
                raise ExpressionError(
                    "expression_bad_derivative",
                    f"{_show(letter)} in a derivative of {unknown!r} is not a coordinate; the "
                    f"coordinates are {_listing(self.coordinates)}",
                )
        if len(letters) > max_order:
            raise ExpressionError(
                "expression_bad_derivative",
                f"a derivative of order {len(letters)} is too high; at most {max_order} is allowed",
            )
        canonical = "".join(sorted(letters, key=_ORDER.__getitem__))
        return sympy.Symbol(f"_f{index}_{canonical}", real=True)

    @property
    def coordinate_symbols(self) -> tuple[Any, ...]:
        """Internal symbols of the coordinates, in canonical order."""
        return tuple(self.coordinate(name) for name in self.coordinates)

    @property
    def parameter_symbols(self) -> tuple[Any, ...]:
        """Internal symbols of the parameters, in declaration order."""
        return tuple(self.parameter(name) for name in self.parameters)

    # -- names used by the parser ----------------------------------------------------
    def lookup(self, name: str, primes: int = 0, max_order: int | None = None) -> Any:
        """Resolve a name as written in an expression to its internal symbol.

        Functions and constants are the parser's business and are not resolved here.

        Parameters
        ----------
        name : str
            An identifier from the text (``"nu"``, ``"u_xx"``, ``"t"``).
        primes : int
            Number of ``'`` after the name; each adds a time derivative.
        max_order : int or None
            Derivative order limit; defaults to ``max_derivative_order``.

        Raises
        ------
        ExpressionError
            ``expression_unknown_name`` or ``expression_bad_derivative`` (no position;
            the parser adds it).
        """
        limit = self.max_derivative_order if max_order is None else max_order
        if name in self._unknown_index:
            return self._primed_field(name, (), primes, limit)
        if primes and (name in self.coordinates or name in self._parameter_index):
            raise ExpressionError(
                "expression_bad_derivative",
                f"a prime (') marks a time derivative and can only follow an unknown; "
                f"{name!r} is a {'coordinate' if name in self.coordinates else 'parameter'}",
            )
        if name in self.coordinates:
            return self.coordinate(name)
        if name in self._parameter_index:
            return self.parameter(name)
        head, sep, tail = name.partition("_")
        if sep and head in self._unknown_index:
            if not tail:
                raise ExpressionError(
                    "expression_bad_derivative",
                    f"{name!r} names no derivative; write e.g. {head}_{self._example_letter()}",
                )
            return self._primed_field(head, tuple(tail), primes, limit)
        raise ExpressionError("expression_unknown_name", self._unknown_reason(name))

    def _example_letter(self) -> str:
        return self.coordinates[-1] if self.coordinates else "t"

    def _primed_field(self, unknown: str, letters: tuple[str, ...], primes: int, limit: int) -> Any:
        if primes and "t" not in self.coordinates:
            raise ExpressionError(
                "expression_bad_derivative",
                "a prime (') marks a time derivative, but t is not a coordinate here",
            )
        return self._field(unknown, letters + ("t",) * primes, limit)

    def _unknown_reason(self, name: str) -> str:
        reason = f"unknown name {name!r}"
        known = [*self.coordinates, *self.unknowns, *self.parameters, *FUNCTIONS, *CONSTANTS]
        similar = [word for word in known if word.lower() == name.lower()]
        head, sep, _ = name.partition("_")
        if name in NAME_HINTS:
            reason += f" ({NAME_HINTS[name]})"
        elif similar:
            reason += f" (did you mean {similar[0]!r}?)"
        elif name in COORDINATE_LETTERS:
            reason += f" ({name} is not a coordinate here)"
        elif sep:
            reason += f" ({head!r} is not an unknown here)"
        return (
            f"{reason}; expected a coordinate ({_listing(self.coordinates)}), an unknown "
            f"({_listing(self.unknowns)}), a parameter ({_listing(self.parameters)}), a "
            "function or a constant"
        )

    # -- describing symbols ----------------------------------------------------------
    def describe(self, symbol: Any) -> SymbolInfo | None:
        """What an internal symbol of this namespace stands for, or None for any other.

        See :meth:`info` for the variant that raises.
        """
        match = _INTERNAL.fullmatch(symbol.name) if isinstance(symbol, sympy.Symbol) else None
        info: SymbolInfo | None = None
        if match is not None:
            coordinate, parameter, unknown, letters = match.groups()
            if coordinate is not None and coordinate in self.coordinates:
                info = SymbolInfo("coordinate", coordinate, _ORDER[coordinate])
            elif parameter is not None and int(parameter) < len(self.parameters):
                index = int(parameter)
                info = SymbolInfo("parameter", self.parameters[index], index)
            elif unknown is not None and int(unknown) < len(self.unknowns):
                info = self._field_info(int(unknown), letters)
        # The name alone is not enough: Symbol("_p0") without real=True is another symbol.
        if info is None or self._symbol_of(info) != symbol:
            return None
        return info

    def info(self, symbol: Any) -> SymbolInfo:
        """Like :meth:`describe`, but a foreign symbol is an error.

        Raises
        ------
        ExpressionError
            ``expression_foreign_symbol`` if ``symbol`` is not one of this namespace's.
        """
        info = self.describe(symbol)
        if info is None:
            raise ExpressionError(
                "expression_foreign_symbol",
                f"symbol {_show(str(symbol))} does not belong to this namespace",
            )
        return info

    def _field_info(self, index: int, letters: str) -> SymbolInfo | None:
        derivative = tuple(letters)
        if any(letter not in self.coordinates for letter in derivative):
            return None
        if len(derivative) > self.max_derivative_order:
            return None
        unknown = self.unknowns[index]
        name = unknown + ("_" + letters if letters else "")
        return SymbolInfo("field", name, index, unknown, derivative, len(derivative))

    def _symbol_of(self, info: SymbolInfo) -> Any:
        if info.kind == "coordinate":
            return self.coordinate(info.name)
        if info.kind == "parameter":
            return self.parameter(info.name)
        assert info.unknown is not None
        return self.field(info.unknown, info.derivative)

    def display_name(self, symbol: Any) -> str:
        """The user's name for an internal symbol (``_f0_xx`` -> ``"u_xx"``).

        Raises
        ------
        ExpressionError
            ``expression_foreign_symbol`` for a symbol of no namespace of this shape.
        """
        return self.info(symbol).name

    def latex_name(self, symbol: Any) -> str:
        """LaTeX for an internal symbol: ``u_{xx}``, ``\\nu``, ``\\mathrm{Re}``, ``t``.

        Raises
        ------
        ExpressionError
            ``expression_foreign_symbol`` as :meth:`display_name`.
        """
        info = self.info(symbol)
        if info.kind == "field":
            assert info.unknown is not None
            base = latex_word(info.unknown)
            if not info.derivative:
                return base
            return base + "_{" + "".join(info.derivative) + "}"
        return latex_word(info.name)

    def symbols_in(self, expr: Any) -> tuple[SymbolInfo, ...]:
        """Describe every free symbol of ``expr``: coordinates, parameters, then fields.

        Raises
        ------
        ExpressionError
            ``expression_foreign_symbol`` if ``expr`` has a symbol of no namespace.
        """
        if not isinstance(expr, sympy.Basic):
            raise ExpressionError(
                "expression_unsupported", f"expected a sympy expression, got {type(expr).__name__}"
            )
        kinds = {"coordinate": 0, "parameter": 1, "field": 2}
        infos = [self.info(symbol) for symbol in expr.free_symbols]
        return tuple(sorted(infos, key=lambda i: (kinds[i.kind], i.index, i.order, i.derivative)))

    def fields_in(self, expr: Any) -> tuple[SymbolInfo, ...]:
        """The fields (unknowns and derivatives) ``expr`` uses, by unknown then order."""
        return tuple(info for info in self.symbols_in(expr) if info.kind == "field")

    def parameters_in(self, expr: Any) -> tuple[SymbolInfo, ...]:
        """The parameters ``expr`` uses, in declaration order."""
        return tuple(info for info in self.symbols_in(expr) if info.kind == "parameter")

    def coordinates_in(self, expr: Any) -> tuple[SymbolInfo, ...]:
        """The coordinates ``expr`` uses, in canonical order."""
        return tuple(info for info in self.symbols_in(expr) if info.kind == "coordinate")
