"""One closed-form validation case: a problem, its exact solution, a perturbation family.

A case is data: the problem as a client sends it, the exact solution from the literature (with
its source), the hypotheses' regularity values derived from the closed form, and a perturbation
``phi`` such that the surrogate is ``u_model = u_exact + eps * phi``. The closed forms are
written as sympy expressions by this package (never parsed from text) and turned into numpy
callables here; the service's own parser and families are not used to form residuals or true
errors.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import sympy as sp

t, x, y, z = sp.symbols("t x y z", real=True)
SPACE_SYMBOLS: dict[str, sp.Symbol] = {"x": x, "y": y, "z": z}

#: lhs - rhs of each equation, applied to a tuple of candidate solutions (one per unknown)
Operator = Callable[[Sequence[sp.Expr]], Sequence[sp.Expr]]

DEFAULT_EPSILONS: tuple[float, ...] = (1e-1, 1e-2, 1e-3)

_KEY = re.compile(r"^sup_(abs|neg|pos|grad)_(model_)?([A-Za-z][A-Za-z0-9]*?)((?:_[txyz]+)?)$")


@dataclass(frozen=True)
class ClosedFormCase:
    """A closed-form solution of one family's PDE (or ODE system) and how to perturb it.

    Attributes
    ----------
    key : str
        Stable identifier (the test id and the row name of docs/theory/validation.md).
    family : str
        The family id the service must classify the problem into.
    title, source : str
        What the solution is, and where it is published (author, year, equation or section;
        "[from memory]" where the reference was not re-checked).
    problem : mapping
        The problem object exactly as a client posts it.
    exact, perturbation : tuple of sympy expressions
        One per unknown, in the variables ``t`` and the space axes (``t`` only for an ODE;
        space only for a steady problem).
    operator : callable
        ``lhs - rhs`` of every equation, in sympy, written out independently of the problem text.
    regularity : mapping
        Regularity values of the exact solution: a number or a sympy expression in ``t``
        (sent as text). Each ``sup_*`` key is checked against the closed form on a dense grid.
    model_regularity : mapping
        ``sup_*_model_*`` key -> bound ``c`` of the same quantity of ``phi``; the value sent is
        the exact solution's value plus ``eps * c`` (triangle inequality).
    epsilons : tuple of float
        Perturbation amplitudes.
    points : mapping
        Gauss-Legendre points per axis of the plan.
    expected_status : str
        ``valid`` unless the case documents otherwise.
    sharp_initial : bool
        The bound at ``t0`` is the L2 norm of the initial residual itself (L2 energy
        families); ``False`` where the energy holds derivatives too (wave).
    """

    key: str
    family: str
    title: str
    source: str
    problem: Mapping[str, Any]
    exact: tuple[sp.Expr, ...]
    perturbation: tuple[sp.Expr, ...]
    operator: Operator
    regularity: Mapping[str, float | sp.Expr] = field(default_factory=dict)
    model_regularity: Mapping[str, float] = field(default_factory=dict)
    epsilons: tuple[float, ...] = DEFAULT_EPSILONS
    points: Mapping[str, int] = field(default_factory=dict)
    expected_status: str = "valid"
    sharp_initial: bool = True
    notes: str = ""

    # ------------------------------------------------------------------ geometry
    @property
    def axes(self) -> tuple[str, ...]:
        return tuple(self.problem.get("space") or {})

    @property
    def steady(self) -> bool:
        return "time" not in self.problem

    @property
    def time(self) -> tuple[float, float] | None:
        tt = self.problem.get("time")
        return None if tt is None else (float(tt[0]), float(tt[1]))

    @property
    def box(self) -> dict[str, tuple[float, float]]:
        return {
            a: (float(lo), float(hi)) for a, (lo, hi) in (self.problem.get("space") or {}).items()
        }

    @property
    def unknowns(self) -> tuple[str, ...]:
        return tuple(self.problem.get("unknowns") or ["u"])

    @property
    def variables(self) -> tuple[sp.Symbol, ...]:
        """The callables' argument order: ``t`` (unless steady), then the space axes."""
        space = tuple(SPACE_SYMBOLS[a] for a in self.axes)
        return space if self.steady else (t, *space)

    def plan_points(self) -> dict[str, int]:
        if self.points:
            return dict(self.points)
        # coarse but honest: the bound must hold for any plan, and a coarse one is cheap
        default = {1: 16, 2: 10, 3: 6}.get(len(self.axes), 32)
        pts = {a: default for a in self.axes}
        return pts if self.steady else {"t": 8 if self.axes else 32, **pts}

    # ------------------------------------------------------------------ the surrogate
    def model(self, eps: float) -> tuple[sp.Expr, ...]:
        e = sp.Float(eps, 17)
        return tuple(u + e * p for u, p in zip(self.exact, self.perturbation, strict=True))

    def residual_fn(self, eps: float) -> VectorFn:
        """The interior residual ``lhs - rhs`` of the model, one column per equation."""
        return VectorFn(self.variables, tuple(self.operator(self.model(eps))))

    def exact_residual_fn(self) -> VectorFn:
        return VectorFn(self.variables, tuple(self.operator(self.exact)))

    def error_fn(self, eps: float) -> VectorFn:
        """``u_model - u_exact = eps * phi`` (exactly, without cancellation)."""
        return VectorFn(self.variables, tuple(eps * p for p in self.perturbation))

    # ------------------------------------------------------------------ regularity
    def quantity(self, key: str) -> tuple[str, VectorFn] | None:
        """For a ``sup_*`` key: its kind (abs/neg/pos/grad) and the field it bounds (exact
        solution, or ``phi`` for a model key); ``None`` for keys of another shape."""
        m = _KEY.match(key)
        if m is None or m.group(3) not in self.unknowns:
            return None
        kind, is_model, name, derivs = m.groups()
        base = self.perturbation if is_model else self.exact
        v = base[self.unknowns.index(name)]
        if kind == "grad":
            comps = tuple(sp.diff(v, SPACE_SYMBOLS[a]) for a in self.axes)
            return kind, VectorFn(self.variables, comps)
        for letter in derivs.lstrip("_"):
            v = sp.diff(v, t if letter == "t" else SPACE_SYMBOLS[letter])
        return kind, VectorFn(self.variables, (v,))

    def regularity_for(self, eps: float) -> dict[str, float | str]:
        """The wire regularity: exact values, and model values ``exact + eps * c``."""
        out: dict[str, float | str] = {k: _wire(v) for k, v in self.regularity.items()}
        for key, c in self.model_regularity.items():
            base = key.replace("_model_", "_", 1)
            if base not in self.regularity:
                raise ValueError(f"{self.key}: {key} needs {base} in the case's regularity")
            value = self.regularity[base]
            if isinstance(value, sp.Expr) and value.free_symbols:
                out[key] = f"{_wire(value)} + {eps * c!r}"
            else:
                out[key] = float(value) + eps * c
        return out


def _wire(value: float | sp.Expr) -> float | str:
    if isinstance(value, sp.Expr) and value.free_symbols:
        return sp.sstr(value, full_prec=True)
    return float(value)


class VectorFn:
    """numpy callable of sympy expressions: ``fn(*columns) -> (n, m)`` array."""

    def __init__(self, variables: Sequence[sp.Symbol], exprs: Sequence[sp.Expr]) -> None:
        self.exprs = tuple(exprs)
        self._funcs = [sp.lambdify(tuple(variables), e, modules="numpy") for e in self.exprs]

    def __call__(self, *cols: np.ndarray) -> np.ndarray:
        shape = np.shape(cols[0]) if cols else (1,)
        out = [np.broadcast_to(np.asarray(f(*cols), dtype=float), shape) for f in self._funcs]
        return np.stack(out, axis=-1)


def time_function(value: float | sp.Expr) -> Callable[[np.ndarray], np.ndarray]:
    """A regularity value (number or expression in ``t``) as a numpy function of ``t``."""
    expr = value if isinstance(value, sp.Expr) else sp.Float(value)
    f = sp.lambdify(t, expr, modules="numpy")
    return lambda tt: np.broadcast_to(np.asarray(f(tt), dtype=float), np.shape(tt))


#: a smooth perturbation that moves boundary and initial values (1-D in space)
PHI_TX: sp.Expr = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)
