"""Randomized soundness probe of boundsvc through the HTTP contract.

``.venv/bin/python tools/probe_soundness.py --seed S --cases N [--family F] [--out FILE]``

Each draw builds a problem with a known exact solution, certifies surrogates
``u_model = u_exact + eps * phi`` through the in-process service (the registry runner's path:
``POST /v1/problems``, a Gauss-Legendre ``POST /v1/plans``, base64 residuals,
``POST /v1/certificates``) and checks, for every certificate:

- **soundness**: ``bound >= true error`` over space-time, at the final time and at every
  profile time (steady: ``l2_space``) whenever the status is ``valid`` or ``vacuous`` with
  finite bounds (relative slack 1e-12, the registry's ``ROUNDING``, plus 1e-13 times the largest
  true error of the certificate for float noise where ``phi`` vanishes). The true error is the L2
  norm of ``eps * phi`` (velocity components only for Navier-Stokes) by the registry's
  independent tensor Gauss-Legendre rule, recomputed at 1.5x the resolution for every
  certificate whose effectivity is below 1.02; a steady ``bound.sup_space`` must not be below the
  sampled sup of ``|eps * phi|`` (a lower estimate of the true sup error);
- **robustness**: no 5xx ever (a 5xx body must still be problem+json with a request id and no
  traceback); every 4xx is ``application/problem+json`` with a string ``code`` and the
  matching ``status``;
- a ``valid`` certificate whose inputs are honest must not be ``invalid-hypotheses``;
- requests slower than 20 s are recorded (a legal request should not cost minutes of CPU).

Draws (``--family`` restricts them to one family id):

- *registry variants*: a case of ``validation/closed_form`` with its perturbation replaced by a
  random one, the equation retyped (scaled by a constant, sides swapped, moved to one side,
  flux form ``(u^2/2)_x`` for Burgers, equations and unknowns of systems permuted), sometimes
  another final time or space box (the data texts are then re-typed from the exact solution);
- *manufactured problems* (Roache, J. Fluids Eng. 124 (2002) 4-10, the method of manufactured
  solutions): a random smooth exact solution, random coefficients (diffusion, advection,
  reaction, viscosity, wave speed, damping, mass, pressure factor, mass matrix of an ODE system;
  variable coefficients for the linear family), random boxes, offsets and time intervals,
  scaled and flux-form typings; the forcing ``L u_exact`` is computed with sympy and typed into
  the equation text, so the exact solution is known. Divergence-free velocities come from a
  stream function (2-D) or a vector potential (3-D).
- *perturbations* ``phi``: random sums of products of ``sin``/``cos`` of linear forms,
  exponentials and polynomials (random frequencies, phases, amplitudes); independently
  periodic along periodic axes or not, zero on the walls (a bubble factor; the boundary residual
  is then sent as exact zeros) or not, zero at ``t0`` or not. ``eps`` is log-uniform in
  ``[1e-5, 0.5]``; plan points are random within the plan limits (sometimes adequate for the
  frequencies, sometimes not).
- *fields mode* (about 12 % of certificates, docs/api.md): the model's values and derivatives
  are sent instead of the ``interior`` (and ``initial`` / ``boundary``) residuals; the field names
  are negotiated from the service's ``residual_missing`` / ``fields_invalid`` answers.
- *hostile requests* (``--hostile`` probability per certificate): non-finite, short, missing,
  extra or broken residual arrays, unknown, negative, malformed or singular regularity values,
  absurd plans and problems, unknown ids, a body that is not JSON; each must be a 4xx
  problem+json (or a sane 201 where the input is legal).

Honesty rules for regularity values (a low bound is a bug only if the hypotheses hold):

- every value bounds the sup of its quantity over the **whole closed space-time box** (the keys
  ask for the sup over space at each time, or over the boundary only: a space-time sup is
  larger, hence true); model values are computed for ``u_exact + eps * phi`` itself;
- *analytic bound*: every random function carries an upper bound of ``sup |D^alpha f|`` for
  every multi-index (``|D^a sin(w.x + p)| <= prod |w_i|^a_i``, the exponential's maximum at a
  corner of the box, polynomial coefficients, the Leibniz rule for products, the triangle
  inequality for sums): rigorous;
- *grid bound*: the maximum over a dense tensor grid of the closed box plus the Lipschitz
  correction ``sum_i (h_i/2) sup |d_i q|``, where ``sup |d_i q|`` is the analytic bound when the
  exact solution is a random function of this tool (rigorous), and **2x the grid maximum of
  |d_i q|** for registry exact solutions (tanh, rational, ...: a heuristic safety factor);
- the value sent is ``min(analytic, grid) * (1 + 1e-7) + 1e-12``; a time-varying value is a
  linear function of ``t`` above the per-time-slice grid bounds; a loosened value multiplies by
  a factor in ``[1, 4]`` or adds ``0.3 sin(2t)^2`` (larger, still true);
- registry regularity values are used as given (they are checked against the closed form by
  ``validation.closed_form._checks``) only when the box and the time interval are unchanged;
  a model value may then be ``registry value + eps * (analytic bound of phi)`` (triangle
  inequality), as the registry itself does;
- the one-sided keys (``sup_neg_*``, ``sup_pos_*``), the gradient and velocity norms, the
  compressive strain ``lambda_max(-sym grad u)`` (eigenvalues are 1-Lipschitz in the Frobenius
  norm) and the elliptic residual sups follow the same rules (the residual's derivative bound is
  the heuristic 2x grid maximum).

A finding is written with everything needed to reproduce it (problem, plan request, regularity,
eps, perturbation and exact solution as sympy text) and a diagnosis: the certificate again with
a fine plan (a bound that is then above the truth points at the heuristic quadrature of the
residual integrals rather than at a derivation step), and where the violations are (``t0``, the
first output time after ``t0``, or later). ``--draw I`` re-runs draw ``I`` of a seed (the draws
are reproducible for a given version of this file and of the service).
"""

from __future__ import annotations

import argparse
import base64
import contextlib
import copy
import itertools
import json
import math
import re
import sys
import tempfile
import time
import traceback
from collections import Counter, defaultdict
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import sympy as sp

REPO = Path(__file__).resolve().parent.parent
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from validation.closed_form import all_cases  # noqa: E402
from validation.closed_form._case import ClosedFormCase, VectorFn, t, x, y, z  # noqa: E402
from validation.closed_form._runner import ROUNDING, CaseResult  # noqa: E402
from validation.closed_form._truth import TIME_NODES, true_error  # noqa: E402

ALL_VARS: tuple[str, ...] = ("t", "x", "y", "z")
SYMS: dict[str, sp.Symbol] = {"t": t, "x": x, "y": y, "z": z}
Alpha = tuple[int, int, int, int]
Box = Mapping[str, tuple[float, float]]
Operator = Callable[[Sequence[sp.Expr]], Sequence[sp.Expr]]
ZERO: Alpha = (0, 0, 0, 0)
COORDINATES = frozenset(SYMS.values())
ONE: sp.Expr = sp.Integer(1)

FAMILIES: tuple[str, ...] = (
    "linear-advection-diffusion-reaction",
    "semilinear-parabolic",
    "scalar-conservation-law",
    "wave",
    "incompressible-navier-stokes",
    "linear-elliptic",
    "ode-system",
)
_KEY_RE = r"^sup_(abs|neg|pos|grad)_(model_)?([A-Za-z][A-Za-z0-9]*?)((?:_[txyz]+)?)$"
#: relative inflation of every computed sup (covers the decimal round trip of the JSON number)
INFLATE = 1e-7


def unit(var: str) -> Alpha:
    out = [0, 0, 0, 0]
    out[ALL_VARS.index(var)] = 1
    return (out[0], out[1], out[2], out[3])


def add(a: Alpha, b: Alpha) -> Alpha:
    return (a[0] + b[0], a[1] + b[1], a[2] + b[2], a[3] + b[3])


def alpha_of(letters: str) -> Alpha:
    out = ZERO
    for c in letters:
        out = add(out, unit(c))
    return out


def diff_alpha(expr: sp.Expr, alpha: Alpha) -> sp.Expr:
    for v, k in zip(ALL_VARS, alpha, strict=True):
        if k:
            expr = sp.diff(expr, SYMS[v], k)
    return expr


# ====================================================================== functions with bounds
class Factor:
    """A smooth factor with an upper bound of ``sup |D^alpha f|`` over a box, any ``alpha``."""

    expr: sp.Expr

    def bound(self, alpha: Alpha, box: Box) -> float:
        raise NotImplementedError


@dataclass(frozen=True)
class Wave(Factor):
    """``sin`` or ``cos`` of ``sum w_v v + phase``: ``|D^alpha| <= prod |w_v|^alpha_v``."""

    freqs: tuple[tuple[str, sp.Expr], ...]
    phase: sp.Expr
    cosine: bool

    @property
    def expr(self) -> sp.Expr:
        arg = sum((w * SYMS[v] for v, w in self.freqs), self.phase)
        return sp.cos(arg) if self.cosine else sp.sin(arg)

    def bound(self, alpha: Alpha, box: Box) -> float:
        w = dict(self.freqs)
        out = 1.0
        for v, k in zip(ALL_VARS, alpha, strict=True):
            if k:
                if v not in w:
                    return 0.0
                out *= abs(float(w[v])) ** k
        return out


@dataclass(frozen=True)
class Exp(Factor):
    """``exp(sum a_v v)``: ``|D^alpha| <= prod |a_v|^alpha_v * max over the box's corners``."""

    rates: tuple[tuple[str, sp.Expr], ...]

    @property
    def expr(self) -> sp.Expr:
        return sp.exp(sum(a * SYMS[v] for v, a in self.rates))

    def bound(self, alpha: Alpha, box: Box) -> float:
        r = dict(self.rates)
        out = 1.0
        for v, k in zip(ALL_VARS, alpha, strict=True):
            if k:
                if v not in r:
                    return 0.0
                out *= abs(float(r[v])) ** k
        top = sum(max(float(a) * box[v][0], float(a) * box[v][1]) for v, a in self.rates)
        return out * math.exp(top)


@dataclass(frozen=True)
class Poly(Factor):
    """``sum_j c_j (v - s)^j``: ``|d^k| <= sum_j |c_j| j!/(j-k)! R^(j-k)``, ``R = max|v - s|``."""

    var: str
    center: sp.Expr
    coeffs: tuple[sp.Expr, ...]

    @property
    def expr(self) -> sp.Expr:
        return sum(c * (SYMS[self.var] - self.center) ** j for j, c in enumerate(self.coeffs))

    def bound(self, alpha: Alpha, box: Box) -> float:
        k = alpha[ALL_VARS.index(self.var)]
        if sum(alpha) != k:
            return 0.0
        lo, hi = box[self.var]
        R = max(abs(lo - float(self.center)), abs(hi - float(self.center)))
        return sum(
            abs(float(c)) * math.perm(j, k) * R ** (j - k)
            for j, c in enumerate(self.coeffs)
            if j >= k
        )


@dataclass(frozen=True)
class Bubble(Factor):
    """``(v - lo)(hi - v)``, zero on both faces: bounds ``(hi - lo)^2/4``, ``hi - lo``, ``2``."""

    var: str
    lo: sp.Expr
    hi: sp.Expr

    @property
    def expr(self) -> sp.Expr:
        v = SYMS[self.var]
        return (v - self.lo) * (self.hi - v)

    def bound(self, alpha: Alpha, box: Box) -> float:
        k = alpha[ALL_VARS.index(self.var)]
        if sum(alpha) != k:
            return 0.0
        L = float(self.hi - self.lo)
        return {0: L * L / 4, 1: L, 2: 2.0}.get(k, 0.0)


def _sub_indices(alpha: Alpha) -> Iterator[Alpha]:
    for b in itertools.product(*(range(k + 1) for k in alpha)):
        yield (b[0], b[1], b[2], b[3])


def _product_bound(factors: Sequence[Factor], alpha: Alpha, box: Box) -> float:
    """Leibniz: ``D^a (f g) = sum_b C(a, b) D^b f D^(a-b) g``, each term bounded."""
    if not factors:
        return 1.0 if alpha == ZERO else 0.0
    head, rest = factors[0], factors[1:]
    total = 0.0
    for beta in _sub_indices(alpha):
        b = head.bound(beta, box)
        if b == 0.0:
            continue
        gamma = (alpha[0] - beta[0], alpha[1] - beta[1], alpha[2] - beta[2], alpha[3] - beta[3])
        mult = math.prod(math.comb(a, c) for a, c in zip(alpha, beta, strict=True))
        total += mult * b * _product_bound(rest, gamma, box)
    return total


@dataclass(frozen=True)
class Term:
    coeff: sp.Expr
    factors: tuple[Factor, ...]

    @property
    def expr(self) -> sp.Expr:
        return self.coeff * sp.Mul(*(f.expr for f in self.factors))

    def bound(self, alpha: Alpha, box: Box) -> float:
        return abs(float(self.coeff)) * _product_bound(self.factors, alpha, box)

    def times(self, factor: Factor) -> Term:
        return Term(self.coeff, (*self.factors, factor))


@dataclass(frozen=True)
class Field:
    """``sum_k c_k D^(a_k) f_k`` of terms: an expression and an analytic derivative bound."""

    parts: tuple[tuple[sp.Expr, Term, Alpha], ...]

    @staticmethod
    def of(terms: Sequence[Term]) -> Field:
        return Field(tuple((sp.Integer(1), term, ZERO) for term in terms))

    @property
    def expr(self) -> sp.Expr:
        return sum((c * diff_alpha(term.expr, a) for c, term, a in self.parts), sp.Integer(0))

    def bound(self, alpha: Alpha, box: Box) -> float:
        return sum(abs(float(c)) * term.bound(add(alpha, a), box) for c, term, a in self.parts)

    def derivative(self, alpha: Alpha, coeff: sp.Expr = ONE) -> Field:
        return Field(tuple((coeff * c, term, add(a, alpha)) for c, term, a in self.parts))

    def __add__(self, other: Field) -> Field:
        return Field(self.parts + other.parts)

    def times(self, factor: Factor) -> Field:
        if any(a != ZERO for _, _, a in self.parts):
            raise ValueError("only an underived field can be multiplied by a factor")
        return Field(tuple((c, term.times(factor), a) for c, term, a in self.parts))

    def max_frequency(self, var: str, box: Box) -> float:
        """A rough phase span along ``var`` (to size adequate plans)."""
        lo, hi = box.get(var, (0.0, 1.0))
        span = 0.0
        for _, term, a in self.parts:
            s = float(a[ALL_VARS.index(var)])
            for f in term.factors:
                if isinstance(f, Wave):
                    s += abs(float(dict(f.freqs).get(var, 0))) * (hi - lo)
                elif isinstance(f, Exp):
                    s += abs(float(dict(f.rates).get(var, 0))) * (hi - lo)
                elif isinstance(f, Poly | Bubble) and f.var == var:
                    s += 2.0 * (len(f.coeffs) if isinstance(f, Poly) else 2)
            span = max(span, s)
        return span


def normalize(f: Field, geo: Geometry, target: float, alphas: Sequence[Alpha] = (ZERO,)) -> Field:
    """``f`` scaled down (by a dyadic factor) so that the analytic bound of every ``D^alpha f``
    is at most ``target``: keeps exact solutions, hence rates and data, moderate."""
    box = geo.box
    worst = max(f.bound(a, box) for a in alphas)
    if worst <= target or worst == 0:
        return f
    k = math.ceil(math.log2(worst / target))
    c = sp.Rational(1, 2**k)
    return Field(tuple((c * coef, term, a) for coef, term, a in f.parts))


def rational(rng: np.random.Generator, lo: int, hi: int, den: int, nonzero: bool = True) -> sp.Expr:
    while True:
        v = int(rng.integers(lo, hi + 1))
        if v or not nonzero:
            return sp.Rational(v, den)


@dataclass(frozen=True)
class Geometry:
    """The variables of a random function: box (incl. ``t``), periodic axes and their lengths."""

    box: dict[str, tuple[float, float]]
    periodic: dict[str, float]

    @property
    def variables(self) -> tuple[str, ...]:
        return tuple(v for v in ALL_VARS if v in self.box)


def random_term(
    rng: np.random.Generator,
    geo: Geometry,
    *,
    respect_periodic: bool,
    fmax: float,
    amp: float,
    max_factors: int = 3,
) -> Term:
    variables = geo.variables
    factors: list[Factor] = []
    for _ in range(int(rng.integers(1, max_factors + 1))):
        kind = rng.choice(["wave", "wave", "wave", "exp", "poly"])
        free = [v for v in variables if not (respect_periodic and v in geo.periodic)]
        if kind in ("exp", "poly") and not free:
            kind = "wave"
        if kind == "wave":
            size = min(len(variables), int(rng.integers(1, 3)))
            chosen = [str(v) for v in rng.choice(variables, size=size, replace=False)]
            freqs: list[tuple[str, sp.Expr]] = []
            for v in chosen:
                freqs.append((v, _frequency(rng, geo, v, respect_periodic, fmax)))
            phase = sp.Rational(int(rng.integers(0, 629)), 100)
            factors.append(Wave(tuple(freqs), phase, bool(rng.random() < 0.5)))
        elif kind == "exp":
            v = str(rng.choice(free))
            factors.append(Exp(((v, rational(rng, -12, 12, 8)),)))
        else:
            v = str(rng.choice(free))
            lo, hi = geo.box[v]
            center = sp.Rational(repr((lo + hi) / 2)) if _dyadic((lo + hi) / 2) else sp.Integer(0)
            deg = int(rng.integers(1, 4))
            coeffs = tuple(rational(rng, -8, 8, 4, nonzero=False) for _ in range(deg + 1))
            if all(c == 0 for c in coeffs):
                coeffs = (sp.Integer(1), *coeffs[1:])
            factors.append(Poly(v, center, coeffs))
    coeff = sp.Rational(int(rng.integers(1, 17)), 8) * (1 if rng.random() < 0.5 else -1)
    coeff = coeff * sp.nsimplify(amp)
    return Term(coeff, tuple(factors))


def _dyadic(v: float) -> bool:
    return float(v * 1024).is_integer()


def _frequency(
    rng: np.random.Generator, geo: Geometry, var: str, respect_periodic: bool, fmax: float
) -> sp.Expr:
    """A frequency along ``var``: a multiple of ``2 pi / L`` on a periodic axis when periodicity
    is respected (or by chance), otherwise a random quarter-integer up to ``fmax``."""
    if var in geo.periodic and (respect_periodic or rng.random() < 0.5):
        k = int(rng.integers(-3, 4)) or 1
        L = geo.periodic[var]
        if _dyadic(L):
            return 2 * sp.pi * k / sp.Rational(repr(L))
        if abs(L - 2 * math.pi) < 1e-12:
            return sp.Integer(k)
    return rational(rng, -int(4 * fmax), int(4 * fmax), 4)


def random_field(
    rng: np.random.Generator,
    geo: Geometry,
    *,
    respect_periodic: bool,
    fmax: float,
    amp: float = 1.0,
    max_terms: int = 3,
    max_factors: int = 3,
) -> Field:
    n = int(rng.integers(1, max_terms + 1))
    return Field.of(
        [
            random_term(
                rng,
                geo,
                respect_periodic=respect_periodic,
                fmax=fmax,
                amp=amp,
                max_factors=max_factors,
            )
            for _ in range(n)
        ]
    )


# ====================================================================== equations as text
@dataclass
class Equation:
    """One typed equation: terms on each side as (placeholder expression, text)."""

    lhs: list[tuple[sp.Expr, str]] = field(default_factory=list)
    rhs: list[tuple[sp.Expr, str]] = field(default_factory=list)
    scale: sp.Expr = ONE

    def put(
        self,
        rng: np.random.Generator,
        expr: sp.Expr,
        text: str | None = None,
        side: str | None = None,
    ) -> None:
        """Add ``expr`` to the left side (as ``expr``) or to the right (as ``-expr``)."""
        where = side or ("lhs" if rng.random() < 0.6 else "rhs")
        if where == "lhs":
            self.lhs.append((expr, text if text is not None else sp.sstr(expr)))
        else:
            neg = -expr
            self.rhs.append((neg, f"-({text})" if text is not None else sp.sstr(neg)))

    def expr(self) -> sp.Expr:
        return self.scale * (sum(e for e, _ in self.lhs) - sum(e for e, _ in self.rhs))

    def text(self) -> str:
        def side(items: list[tuple[sp.Expr, str]]) -> str:
            return " + ".join(f"({s})" for _, s in items) if items else "0"

        lhs, rhs = side(self.lhs), side(self.rhs)
        if self.scale != 1:
            c = sp.sstr(self.scale)
            return f"{c}*({lhs}) = {c}*({rhs})"
        return f"{lhs} = {rhs}"


def placeholder(name: str, alpha: Alpha) -> sp.Symbol:
    letters = "".join(v * k for v, k in zip(ALL_VARS, alpha, strict=True))
    return sp.Symbol(f"{name}_{letters}" if letters else name)


def make_operator(
    exprs: Sequence[sp.Expr], unknowns: Sequence[str], params: Mapping[sp.Symbol, sp.Expr]
) -> Operator:
    """``lhs - rhs`` of each typed equation, as a sympy function of candidate solutions."""
    index = {n: i for i, n in enumerate(unknowns)}
    pattern = {}
    for e in exprs:
        for s in e.free_symbols:
            if s in COORDINATES:
                continue
            name, _, letters = str(s).partition("_")
            if name in index and (not letters or set(letters) <= set(ALL_VARS)):
                pattern[s] = (index[name], alpha_of(letters))
    fixed = [e.xreplace(dict(params)) for e in exprs]

    def op(v: Sequence[sp.Expr]) -> list[sp.Expr]:
        sub = {s: diff_alpha(v[i], a) for s, (i, a) in pattern.items()}
        return [e.xreplace(sub) for e in fixed]

    return op


def _vanishes(exprs: Sequence[sp.Expr], geo: Geometry, rng: np.random.Generator) -> bool:
    """The exact solution's residual is ~0 at random points of the box."""
    variables = geo.variables
    cols = [rng.uniform(*geo.box[v], size=25) for v in variables]
    for e in exprs:
        f = sp.lambdify(tuple(SYMS[v] for v in variables), e, modules="numpy")
        vals = np.broadcast_to(np.asarray(f(*cols), dtype=float), (25,))
        if not np.all(np.abs(vals) < 1e-7):
            return False
    return True


def text_ok(text: str) -> bool:
    return len(text) <= 1900 and len(text.replace("**", "^")) <= 1900 and text.count("(") < 300


# ====================================================================== draws
@dataclass
class Draw:
    """A problem with a known exact solution, ready for random perturbations."""

    family: str
    label: str
    problem: dict[str, Any]
    exact: tuple[sp.Expr, ...]
    exact_fields: tuple[Field | None, ...]
    operator: Operator
    bounded: tuple[int, ...]
    registry_regularity: Mapping[str, float | sp.Expr] = field(default_factory=dict)
    registry_base: str | None = None
    sharp_initial: bool = True
    pressure: int | None = None  # index of the pressure (Navier-Stokes)

    @property
    def axes(self) -> tuple[str, ...]:
        return tuple(self.problem.get("space") or {})

    @property
    def steady(self) -> bool:
        return "time" not in self.problem

    @property
    def unknowns(self) -> tuple[str, ...]:
        return tuple(self.problem.get("unknowns") or ["u"])

    def boundary_kind(self, axis: str) -> str:
        return boundary_kind(self.problem, axis)

    def geometry(self) -> Geometry:
        return problem_geometry(self.problem)


def boundary_kind(problem: Mapping[str, Any], axis: str) -> str:
    kind = problem.get("boundary", "dirichlet")
    return str(kind.get(axis, "dirichlet") if isinstance(kind, Mapping) else kind)


def problem_geometry(problem: Mapping[str, Any]) -> Geometry:
    space = problem.get("space") or {}
    box = {a: (float(lo), float(hi)) for a, (lo, hi) in space.items()}
    if "time" in problem:
        t0, T = problem["time"]
        box = {"t": (float(t0), float(T)), **box}
    periodic = {a: box[a][1] - box[a][0] for a in space if boundary_kind(problem, a) == "periodic"}
    return Geometry(box, periodic)


@dataclass(frozen=True)
class ProbeCase(ClosedFormCase):
    """A registry case object whose true error covers only the bounded unknowns."""

    bounded: tuple[int, ...] = ()

    def error_fn(self, eps: float) -> VectorFn:
        idx = self.bounded or tuple(range(len(self.perturbation)))
        return VectorFn(self.variables, tuple(eps * self.perturbation[i] for i in idx))


def _box_dyadic(rng: np.random.Generator, axes: Sequence[str]) -> dict[str, list[float]]:
    out = {}
    for a in axes:
        lo = float(rng.choice([-1.0, -0.5, 0.0, 0.0, 0.25, 1.0]))
        length = float(rng.choice([0.5, 1.0, 1.0, 1.5, 2.0, 3.0]))
        out[a] = [lo, lo + length]
    return out


def _time(rng: np.random.Generator) -> list[float]:
    t0 = float(rng.choice([0.0, 0.0, 0.0, 0.5, -0.25]))
    return [t0, t0 + float(rng.choice([0.25, 0.5, 1.0, 1.0, 1.5, 2.0]))]


def _param_value(rng: np.random.Generator, lo: float, hi: float) -> float:
    return round(float(rng.uniform(lo, hi)), 2)


def _coef(
    rng: np.random.Generator, params: dict[str, float], name: str, value: float
) -> tuple[sp.Expr, sp.Expr]:
    """A constant coefficient typed as a literal or as a parameter: (placeholder expr, value)."""
    exact = sp.Rational(repr(value))
    if rng.random() < 0.4:
        params[name] = value
        return sp.Symbol(name), exact
    return exact, exact


def _boundary_spec(
    rng: np.random.Generator, axes: Sequence[str], allow_periodic: bool
) -> tuple[Any, dict[str, str]]:
    kinds = {
        a: ("periodic" if allow_periodic and rng.random() < 0.35 else "dirichlet") for a in axes
    }
    if len(set(kinds.values())) == 1 and rng.random() < 0.7:
        return next(iter(kinds.values())), kinds
    return kinds, kinds


def _periodic_box(
    rng: np.random.Generator, box: dict[str, list[float]], kinds: Mapping[str, str]
) -> None:
    for a, k in kinds.items():
        if k == "periodic" and rng.random() < 0.25:
            box[a] = [0.0, 2 * math.pi]


def _finish(
    rng: np.random.Generator,
    family: str,
    label: str,
    problem: dict[str, Any],
    eqs: list[Equation],
    unknowns: Sequence[str],
    exact: Sequence[Field],
    params_sym: Mapping[sp.Symbol, sp.Expr],
    *,
    bounded: Sequence[int] | None = None,
    forcing_eqs: Sequence[int] | None = None,
    data_texts: bool = True,
    pressure: int | None = None,
    sharp_initial: bool = True,
) -> Draw | None:
    """Compute the forcing of each equation from the exact solution, type it, build the draw."""
    exact_exprs = tuple(f.expr for f in exact)
    bare = make_operator([e.expr() / e.scale for e in eqs], unknowns, params_sym)(exact_exprs)
    for i, (eq, s) in enumerate(zip(eqs, bare, strict=True)):
        if forcing_eqs is not None and i not in forcing_eqs:
            continue
        s = sp.expand(s) if sp.count_ops(s) < 60 else s
        if s != 0:
            txt = sp.sstr(s)
            if rng.random() < 0.7:
                eq.rhs.append((s, txt))
            else:
                eq.lhs.append((-s, f"-({txt})"))
    texts = [e.text() for e in eqs]
    if not all(text_ok(tx) for tx in texts):
        return None
    problem["equation"] = texts if len(texts) > 1 or len(unknowns) > 1 else texts[0]
    if len(unknowns) > 1 or unknowns[0] != "u":
        problem["unknowns"] = list(unknowns)
    op = make_operator([e.expr() for e in eqs], unknowns, params_sym)
    if not _vanishes(op(exact_exprs), problem_geometry(problem), rng):
        raise RuntimeError("the manufactured forcing does not cancel (probe bug)")
    if data_texts and "time" in problem and rng.random() < 0.4:
        t0 = sp.Rational(repr(problem["time"][0]))
        vals = [sp.sstr(e.subs(t, t0)) for e in exact_exprs]
        if pressure is None:
            problem["initial_value"] = vals if len(vals) > 1 else vals[0]
    if data_texts and problem.get("space") and rng.random() < 0.3 and len(unknowns) == 1:
        text = sp.sstr(exact_exprs[0])
        if text_ok(text):
            problem["boundary_value"] = text
    return Draw(
        family=family,
        label=label,
        problem=problem,
        exact=exact_exprs,
        exact_fields=tuple(exact),
        operator=op,
        bounded=tuple(bounded if bounded is not None else range(len(unknowns))),
        pressure=pressure,
        sharp_initial=sharp_initial,
    )


def gen_linear(rng: np.random.Generator) -> Draw | None:
    d = int(rng.choice([1, 2, 3], p=[0.55, 0.35, 0.10]))
    axes = ("x", "y", "z")[:d]
    box = _box_dyadic(rng, axes)
    spec, kinds = _boundary_spec(rng, axes, True)
    _periodic_box(rng, box, kinds)
    problem: dict[str, Any] = {"space": box, "time": _time(rng), "boundary": spec}
    geo = problem_geometry(problem)
    u = random_field(
        rng, geo, respect_periodic=True, fmax=2.0 if d < 3 else 1.0, max_terms=2, max_factors=2
    )
    u = normalize(u, geo, 2.0)
    params: dict[str, float] = {}
    eq = Equation(scale=sp.Rational(rng.choice([1, 1, 1, 2, -1, 3]), rng.choice([1, 1, 2, 4])))
    U = {
        a: placeholder("u", a)
        for a in (ZERO, unit("t"), *[unit(a) for a in axes], *[add(unit(a), unit(a)) for a in axes])
    }
    eq.put(rng, U[unit("t")], side="lhs")
    nonper = [a for a in axes if kinds[a] != "periodic"]
    label = []
    for a in axes:
        ua, uaa = U[unit(a)], U[add(unit(a), unit(a))]
        mode = rng.choice(["const", "const", "variable", "zero"])
        others = nonper
        if mode == "variable" and others:
            b = str(rng.choice(others))
            coeff = sp.Rational(repr(_param_value(rng, -1.5, 1.5))) + sp.Rational(1, 2) * sp.sin(
                SYMS[b] + rational(rng, 0, 6, 2, False)
            )
            eq.put(rng, coeff * ua, f"({sp.sstr(coeff)})*{ua}")
            label.append(f"a_{a}({b})")
        elif mode != "zero":
            c, _ = _coef(rng, params, f"a{a}", _param_value(rng, -2, 2))
            eq.put(rng, c * ua)
        kmode = rng.choice(["const", "const", "variable", "zero"])
        if kmode == "variable" and others:
            b = str(rng.choice(others))
            k0 = sp.Rational(repr(_param_value(rng, 0.02, 0.4)))
            kvar = k0 * (
                1 + sp.Rational(1, 2) * sp.cos(2 * SYMS[b] + rational(rng, 0, 6, 2, False))
            )
            if rng.random() < 0.5:  # flux form (k u_x)_x = k u_xx + k_x u_x
                eq.put(
                    rng,
                    -(kvar * uaa + sp.diff(kvar, SYMS[a]) * ua),
                    f"-(({sp.sstr(kvar)})*{ua})_{a}",
                )
            else:
                eq.put(rng, -kvar * uaa, f"-({sp.sstr(kvar)})*{uaa}")
            label.append(f"k_{a}({b})")
        elif kmode != "zero":
            k, _ = _coef(rng, params, f"k{a}", _param_value(rng, 0.01, 0.6))
            if rng.random() < 0.3:
                eq.put(rng, -k * uaa, f"-({sp.sstr(k)}*{ua})_{a}")
            else:
                eq.put(rng, -k * uaa)
        else:
            label.append(f"k_{a}=0")
    cmode = rng.choice(["zero", "const", "const", "variable"])
    if cmode == "const":
        c, _ = _coef(rng, params, "c0", _param_value(rng, -1, 1))
        eq.put(rng, c * U[ZERO])
    elif cmode == "variable":
        cvar = sp.Rational(repr(_param_value(rng, -1, 1))) * sp.cos(t) + (
            SYMS[nonper[0]] / 2 if nonper else 0
        )
        eq.put(rng, cvar * U[ZERO], f"({sp.sstr(cvar)})*u")
        label.append("c(x,t)")
    if params:
        problem["parameters"] = params
    psym = {sp.Symbol(k): sp.Rational(repr(v)) for k, v in params.items()}
    return _finish(
        rng,
        FAMILIES[0],
        f"manufactured d={d} {kinds} {' '.join(label)}",
        problem,
        [eq],
        ["u"],
        [u],
        psym,
    )


_REACTIONS: tuple[tuple[str, Callable[[sp.Expr], sp.Expr]], ...] = (
    ("allen-cahn", lambda u: u - u**3),
    ("fisher", lambda u: sp.Rational(3, 2) * u * (1 - u)),
    ("nagumo", lambda u: u * (1 - u) * (u - sp.Rational(1, 4))),
    ("sin", lambda u: sp.sin(u)),
    ("cubic-damped", lambda u: -(u**3) - u),
    ("square", lambda u: u**2 / 2),
    ("exp", lambda u: sp.exp(-u)),
    ("tanh", lambda u: 2 * sp.tanh(u)),
    ("cos", lambda u: sp.cos(u) / 2),
)


def gen_semilinear(rng: np.random.Generator) -> Draw | None:
    d = int(rng.choice([1, 2, 3], p=[0.6, 0.3, 0.1]))
    axes = ("x", "y", "z")[:d]
    box = _box_dyadic(rng, axes)
    spec, kinds = _boundary_spec(rng, axes, True)
    _periodic_box(rng, box, kinds)
    problem: dict[str, Any] = {"space": box, "time": _time(rng), "boundary": spec}
    geo = problem_geometry(problem)
    amp = float(rng.choice([0.5, 1.0]))
    u = random_field(rng, geo, respect_periodic=True, fmax=1.5, amp=amp, max_terms=2, max_factors=2)
    u = normalize(u, geo, amp)
    params: dict[str, float] = {}
    eq = Equation(scale=sp.Rational(rng.choice([1, 1, 1, 2, -1, 4]), rng.choice([1, 1, 2])))
    U0 = placeholder("u", ZERO)
    eq.put(rng, placeholder("u", unit("t")), side="lhs")
    for a in axes:
        if rng.random() < 0.4:
            c, _ = _coef(rng, params, f"a{a}", _param_value(rng, -1.5, 1.5))
            eq.put(rng, c * placeholder("u", unit(a)))
        k, _ = _coef(rng, params, f"k{a}", _param_value(rng, 0.01, 0.5))
        eq.put(rng, -k * placeholder("u", add(unit(a), unit(a))))
    name, g = _REACTIONS[int(rng.integers(len(_REACTIONS)))]
    eq.put(rng, -g(U0))
    if params:
        problem["parameters"] = params
    psym = {sp.Symbol(k): sp.Rational(repr(v)) for k, v in params.items()}
    return _finish(
        rng, FAMILIES[1], f"manufactured d={d} {kinds} g={name}", problem, [eq], ["u"], [u], psym
    )


_FLUXES: tuple[tuple[str, Callable[[sp.Expr], sp.Expr]], ...] = (
    ("burgers", lambda u: u**2 / 2),
    ("burgers2", lambda u: u**2),
    ("cubic", lambda u: u**3 / 3),
    ("shifted", lambda u: u + u**2 / 2),
    ("quartic", lambda u: u**4 / 4),
    ("negative", lambda u: -(u**2) / 2),
    ("buckley-free", lambda u: u**3 / 3 - u),
    ("sine", lambda u: -sp.cos(u)),
)


def gen_conservation(rng: np.random.Generator) -> Draw | None:
    box = _box_dyadic(rng, ("x",))
    spec = "periodic" if rng.random() < 0.08 else "dirichlet"
    problem: dict[str, Any] = {"space": box, "time": _time(rng), "boundary": spec}
    geo = problem_geometry(problem)
    amp = float(rng.choice([0.25, 0.5, 1.0]))
    u = random_field(rng, geo, respect_periodic=True, fmax=1.0, amp=amp, max_terms=2, max_factors=2)
    u = normalize(normalize(u, geo, amp), geo, 3.0, [unit("x"), unit("t")])
    params: dict[str, float] = {}
    eq = Equation(scale=sp.Rational(rng.choice([1, 1, 1, 2, -1]), rng.choice([1, 1, 2])))
    U0, Ux = placeholder("u", ZERO), placeholder("u", unit("x"))
    eq.put(rng, placeholder("u", unit("t")), side="lhs")
    name, f = _FLUXES[int(rng.integers(len(_FLUXES)))]
    fp = sp.diff(f(U0), U0)
    if rng.random() < 0.5:
        eq.put(rng, fp * Ux, f"({sp.sstr(f(U0))})_x")
        name += "/flux-form"
    else:
        eq.put(rng, fp * Ux, f"({sp.sstr(fp)})*u_x")
    if rng.random() < 0.7:
        nu, _ = _coef(rng, params, "nu", _param_value(rng, 0.01, 0.3))
        eq.put(rng, -nu * placeholder("u", add(unit("x"), unit("x"))))
    else:
        name += " nu=0"
    if params:
        problem["parameters"] = params
    psym = {sp.Symbol(k): sp.Rational(repr(v)) for k, v in params.items()}
    return _finish(
        rng, FAMILIES[2], f"manufactured {spec} f={name}", problem, [eq], ["u"], [u], psym
    )


def gen_wave(rng: np.random.Generator) -> Draw | None:
    d = int(rng.choice([1, 2, 3], p=[0.6, 0.3, 0.1]))
    axes = ("x", "y", "z")[:d]
    box = _box_dyadic(rng, axes)
    spec, kinds = _boundary_spec(rng, axes, True)
    _periodic_box(rng, box, kinds)
    problem: dict[str, Any] = {"space": box, "time": _time(rng), "boundary": spec}
    geo = problem_geometry(problem)
    u = random_field(
        rng, geo, respect_periodic=True, fmax=2.0 if d < 3 else 1.0, max_terms=2, max_factors=2
    )
    u = normalize(u, geo, 2.0)
    params: dict[str, float] = {}
    eq = Equation(scale=sp.Rational(rng.choice([1, 1, 1, 2, -1, 3]), rng.choice([1, 1, 2])))
    eq.put(rng, placeholder("u", (2, 0, 0, 0)), side="lhs")
    label = []
    if rng.random() < 0.4:
        b, _ = _coef(rng, params, "b", _param_value(rng, -0.5, 1.5))
        eq.put(rng, b * placeholder("u", unit("t")))
        label.append("damped")
    for a in axes:
        if rng.random() < 0.25:
            c, _ = _coef(rng, params, f"a{a}", _param_value(rng, -1, 1))
            eq.put(rng, c * placeholder("u", unit(a)))
            label.append(f"a_{a}")
        k, _ = _coef(rng, params, f"c{a}", _param_value(rng, 0.1, 4.0))
        eq.put(rng, -k * placeholder("u", add(unit(a), unit(a))))
    if rng.random() < 0.35:
        m, _ = _coef(rng, params, "m", _param_value(rng, -1, 3))
        eq.put(rng, m * placeholder("u", ZERO))
        label.append("mass")
    if params:
        problem["parameters"] = params
    psym = {sp.Symbol(k): sp.Rational(repr(v)) for k, v in params.items()}
    draw = _finish(
        rng,
        FAMILIES[3],
        f"manufactured d={d} {kinds} {' '.join(label)}",
        problem,
        [eq],
        ["u"],
        [u],
        psym,
        sharp_initial=False,
    )
    if draw is not None and rng.random() < 0.4:
        t0 = sp.Rational(repr(problem["time"][0]))
        v0 = sp.sstr(sp.diff(draw.exact[0], t).subs(t, t0))
        if text_ok(v0):
            problem["initial_velocity"] = v0
    return draw


def gen_navier_stokes(rng: np.random.Generator) -> Draw | None:
    d = 2 if rng.random() < 0.8 else 3
    axes = ("x", "y", "z")[:d]
    box = _box_dyadic(rng, axes)
    spec, kinds = _boundary_spec(rng, axes, True)
    _periodic_box(rng, box, kinds)
    problem: dict[str, Any] = {"space": box, "time": _time(rng), "boundary": spec}
    geo = problem_geometry(problem)
    fmax = 1.5 if d == 2 else 1.0
    vel: list[Field]
    if d == 2:
        psi = random_field(rng, geo, respect_periodic=True, fmax=fmax, max_terms=2, max_factors=2)
        psi = normalize(psi, geo, 1.5, [unit("x"), unit("y")])
        vel = [psi.derivative(unit("y")), psi.derivative(unit("x"), sp.Integer(-1))]
    else:
        A = [
            normalize(
                random_field(
                    rng, geo, respect_periodic=True, fmax=fmax, max_terms=1, max_factors=2
                ),
                geo,
                0.75,
                [unit("x"), unit("y"), unit("z")],
            )
            for _ in range(3)
        ]
        vel = [
            A[2].derivative(unit("y")) + A[1].derivative(unit("z"), sp.Integer(-1)),
            A[0].derivative(unit("z")) + A[2].derivative(unit("x"), sp.Integer(-1)),
            A[1].derivative(unit("x")) + A[0].derivative(unit("y"), sp.Integer(-1)),
        ]
    if rng.random() < 0.3:  # a uniform stream
        vel[0] = vel[0] + Field.of([Term(rational(rng, -4, 4, 4), ())])
    pressure = random_field(rng, geo, respect_periodic=True, fmax=1.0, max_terms=1, max_factors=2)
    pressure = normalize(pressure, geo, 1.0)
    names = ["u", "v", "w"][:d]
    params: dict[str, float] = {}
    nu_value = 0.0 if rng.random() < 0.2 else _param_value(rng, 0.01, 0.5)
    nu, _ = _coef(rng, params, "nu", nu_value) if nu_value else (sp.Integer(0), sp.Integer(0))
    beta = sp.Rational(rng.choice([1, 1, 1, 2, -1]), rng.choice([1, 1, 2]))
    eqs: list[Equation] = []
    for c in names:
        eq = Equation(scale=sp.Rational(rng.choice([1, 1, 2, -1]), rng.choice([1, 1, 2])))
        eq.put(rng, placeholder(c, unit("t")), side="lhs")
        conv = sum(
            placeholder(b, ZERO) * placeholder(c, unit(a)) for b, a in zip(names, axes, strict=True)
        )
        eq.put(rng, conv, side="lhs" if rng.random() < 0.8 else "rhs")
        eq.put(rng, beta * placeholder("p", unit(axes[names.index(c)])))
        if nu_value:
            lap = sum(placeholder(c, add(unit(a), unit(a))) for a in axes)
            eq.put(rng, -nu * lap, f"-{sp.sstr(nu)}*({sp.sstr(lap)})")
        eqs.append(eq)
    div = Equation(scale=sp.Rational(rng.choice([1, 1, 2, -1]), 1))
    div.put(rng, sum(placeholder(c, unit(a)) for c, a in zip(names, axes, strict=True)), side="lhs")
    eqs.append(div)
    unknowns = [*names, "p"]
    if params:
        problem["parameters"] = params
    psym = {sp.Symbol(k): sp.Rational(repr(v)) for k, v in params.items()}
    label = f"manufactured d={d} {kinds} nu={nu_value} beta={beta}"
    return _finish(
        rng,
        FAMILIES[4],
        label,
        problem,
        eqs,
        unknowns,
        [*vel, pressure],
        psym,
        bounded=list(range(d)),
        forcing_eqs=list(range(d)),
        data_texts=False,
        pressure=d,
    )


def gen_elliptic(rng: np.random.Generator) -> Draw | None:
    d = int(rng.choice([1, 2, 3], p=[0.5, 0.35, 0.15]))
    axes = ("x", "y", "z")[:d]
    box = _box_dyadic(rng, axes)
    problem: dict[str, Any] = {"space": box}
    if rng.random() < 0.1:
        problem["boundary"] = "dirichlet"
    geo = problem_geometry(problem)
    u = random_field(rng, geo, respect_periodic=True, fmax=2.0, max_terms=2, max_factors=2)
    u = normalize(u, geo, 2.0)
    params: dict[str, float] = {}
    eq = Equation(scale=sp.Rational(rng.choice([1, 1, 1, 2, -1]), rng.choice([1, 1, 4])))
    k, _ = _coef(rng, params, "k", _param_value(rng, 0.05, 2.0))
    lap = sum(placeholder("u", add(unit(a), unit(a))) for a in axes)
    eq.put(rng, -k * lap, f"-{sp.sstr(k)}*({sp.sstr(lap)})")
    if rng.random() < 0.5:
        c, _ = _coef(rng, params, "c", _param_value(rng, 0.0, 3.0))
        eq.put(rng, c * placeholder("u", ZERO))
    if params:
        problem["parameters"] = params
    psym = {sp.Symbol(kk): sp.Rational(repr(v)) for kk, v in params.items()}
    return _finish(rng, FAMILIES[5], f"manufactured d={d}", problem, [eq], ["u"], [u], psym)


def gen_ode(rng: np.random.Generator) -> Draw | None:
    n = int(rng.choice([1, 2, 3], p=[0.4, 0.4, 0.2]))
    pool = ["y", "q", "x", "y1", "y2", "y3", "z", "s1"]
    names = [str(v) for v in rng.choice(pool, size=n, replace=False)]
    problem: dict[str, Any] = {"time": _time(rng)}
    t0 = problem["time"][0]
    if rng.random() < 0.4:
        problem["time"] = [t0, t0 + float(rng.choice([2.0, 4.0]))]
    geo = Geometry({"t": (float(problem["time"][0]), float(problem["time"][1]))}, {})
    ys = [
        normalize(
            random_field(rng, geo, respect_periodic=True, fmax=2.0, max_terms=2, max_factors=2),
            geo,
            2.0,
        )
        for _ in range(n)
    ]
    Y = [placeholder(nm, ZERO) for nm in names]
    F: list[sp.Expr] = []
    label = []
    for _ in range(n):
        fi = sum((rational(rng, -8, 8, 4, False) * Y[j] for j in range(n)), sp.Integer(0))
        if rng.random() < 0.6:
            j, k = int(rng.integers(n)), int(rng.integers(n))
            kind = rng.choice(["sq", "prod", "sin", "cube", "tlin"])
            c = rational(rng, -4, 4, 4)
            term = {
                "sq": Y[j] ** 2,
                "prod": Y[j] * Y[k],
                "sin": sp.sin(Y[j]),
                "cube": -(Y[j] ** 3),
                "tlin": sp.cos(t) * Y[j],
            }[str(kind)]
            fi += c * term
            label.append(str(kind))
        F.append(fi)
    mode = rng.choice(["identity", "identity", "diagonal", "permutation", "dense"])
    if mode == "identity":
        M = sp.eye(n)
    elif mode == "diagonal":
        M = sp.diag(*[sp.Rational(rng.choice([1, 2, -1, 3]), rng.choice([1, 2])) for _ in range(n)])
    elif mode == "permutation":
        perm = rng.permutation(n)
        M = sp.zeros(n, n)
        for i, j in enumerate(perm):
            M[i, int(j)] = 1
    else:
        while True:
            M = sp.Matrix(n, n, lambda i, j: rational(rng, -4, 4, 2, False) + (2 if i == j else 0))
            if abs(float(M.det())) > 0.5:
                break
    eqs = []
    for i in range(n):
        eq = Equation()
        lhs = sum((M[i, j] * placeholder(names[j], unit("t")) for j in range(n)), sp.Integer(0))
        rhs = sum((M[i, j] * F[j] for j in range(n)), sp.Integer(0))
        eq.put(rng, lhs, side="lhs")
        eq.put(rng, -rhs, side="rhs")
        eqs.append(eq)
    draw = _finish(
        rng,
        FAMILIES[6],
        f"manufactured n={n} M={mode} {' '.join(label)}",
        problem,
        eqs,
        names,
        ys,
        {},
        data_texts=False,
    )
    if draw is None:
        return None
    if rng.random() < 0.5:
        eqs_text = draw.problem["equation"]
        primed = [
            _prime(e, names) for e in (eqs_text if isinstance(eqs_text, list) else [eqs_text])
        ]
        draw.problem["equation"] = primed if isinstance(eqs_text, list) else primed[0]
    if rng.random() < 0.8:
        vals = [sp.sstr(e.subs(t, sp.Rational(repr(problem["time"][0])))) for e in draw.exact]
        draw.problem["initial_value"] = vals if n > 1 else vals[0]
    if n == 1 and names[0] == "u":
        draw.problem.pop("unknowns", None)
    draw.problem.setdefault("unknowns", names)
    return draw


def _prime(text: str, names: Sequence[str]) -> str:
    for nm in names:
        text = re.sub(rf"\b{nm}_t\b", f"{nm}'", text)
    return text


# ------------------------------------------------------------------ registry variants
def _split_eq(text: str) -> tuple[str, str]:
    lhs, _, rhs = text.partition("=")
    return lhs.strip(), rhs.strip()


def _retype(rng: np.random.Generator, text: str, family: str) -> tuple[str, sp.Expr, str]:
    lhs, rhs = _split_eq(text)
    mode = rng.choice(["plain", "scale", "swap", "one-side", "zero-left"])
    if family == "scalar-conservation-law" and "u*u_x" in lhs and rng.random() < 0.5:
        lhs = lhs.replace("u*u_x", "(u^2/2)_x")
    if mode == "scale":
        c = sp.Rational(rng.choice([2, -1, 3, -2, 1]), rng.choice([1, 2, 4, 10]))
        return f"{sp.sstr(c)}*({lhs}) = {sp.sstr(c)}*({rhs})", c, f"scale {c}"
    if mode == "swap":
        return f"{rhs} = {lhs}", sp.Integer(-1), "swap"
    if mode == "one-side":
        return f"{lhs} - ({rhs}) = 0", sp.Integer(1), "one-side"
    if mode == "zero-left":
        return f"0 = ({rhs}) - ({lhs})", sp.Integer(1), "zero-left"
    return f"{lhs} = {rhs}", sp.Integer(1), "plain"


def gen_registry(rng: np.random.Generator, family: str | None) -> Draw | None:
    cases = [c for c in all_cases() if family is None or c.family == family]
    case = cases[int(rng.integers(len(cases)))]
    problem = copy.deepcopy(dict(case.problem))
    eqs = problem["equation"] if isinstance(problem["equation"], list) else [problem["equation"]]
    typed, factors, labels = [], [], []
    for e in eqs:
        tx, c, lab = _retype(rng, e, case.family)
        typed.append(tx)
        factors.append(c)
        labels.append(lab)
    base_op = case.operator
    order = list(range(len(typed)))
    if len(typed) > 1 and rng.random() < 0.4:
        order = [int(i) for i in rng.permutation(len(typed))]
        labels.append(f"equations {order}")
    problem["equation"] = [typed[i] for i in order] if len(typed) > 1 else typed[0]

    def op(v: Sequence[sp.Expr]) -> list[sp.Expr]:
        out = list(base_op(v))
        return [factors[i] * out[i] for i in order]

    unknowns = list(case.unknowns)
    exact = list(case.exact)
    bounded = list(range(len(unknowns)))
    pressure = None
    if case.family == "incompressible-navier-stokes":
        pressure = len(unknowns) - 1
        bounded = bounded[:-1]
    operator: Operator = op
    if len(unknowns) > 1 and rng.random() < 0.3:
        perm = [int(i) for i in rng.permutation(len(unknowns))]  # new position k holds old perm[k]
        inv = {old: new for new, old in enumerate(perm)}
        problem["unknowns"] = [unknowns[i] for i in perm]
        if isinstance(problem.get("initial_value"), list):
            problem["initial_value"] = [problem["initial_value"][i] for i in perm]
        exact = [exact[i] for i in perm]
        bounded = [inv[i] for i in bounded]
        pressure = None if pressure is None else inv[pressure]

        def permuted(v: Sequence[sp.Expr], _op: Operator = op) -> Sequence[sp.Expr]:
            old = [v[inv[i]] for i in range(len(v))]
            return _op(old)

        operator = permuted
        labels.append(f"unknowns {problem['unknowns']}")
    valid_registry = True
    # another final time (not past a known pole) or another box for Dirichlet axes
    if "time" in problem and rng.random() < 0.3 and case.key not in ("riccati-tan",):
        t0, T = problem["time"]
        limit = 1.9 if "compressive" in case.key else math.inf
        newT = min(t0 + (T - t0) * float(rng.choice([0.5, 0.75, 1.25, 1.5])), limit)
        problem["time"] = [t0, newT]
        valid_registry = False
        labels.append(f"T={newT}")
    space = problem.get("space") or {}
    kinds = {a: boundary_kind(problem, a) for a in space}
    if (
        space
        and rng.random() < 0.25
        and all(k == "dirichlet" for k in kinds.values())
        and case.family != "incompressible-navier-stokes"
    ):
        a = str(rng.choice(list(space)))
        lo, hi = space[a]
        shift = float(rng.choice([-0.5, -0.25, 0.25, 0.5]))
        scale = float(rng.choice([0.5, 1.0, 1.5]))
        space[a] = [lo + shift, lo + shift + (hi - lo) * scale]
        valid_registry = False
        labels.append(f"{a} in {space[a]}")
        if "time" in problem:
            t0 = sp.Rational(repr(problem["time"][0]))
            if "initial_value" in problem and len(exact) == 1:
                problem["initial_value"] = sp.sstr(exact[0].subs(t, t0))
        if "boundary_value" in problem and len(exact) == 1:
            problem["boundary_value"] = sp.sstr(exact[0])
    return Draw(
        family=case.family,
        label=f"registry {case.key} [{', '.join(labels)}]",
        problem=problem,
        exact=tuple(exact),
        exact_fields=tuple(None for _ in exact),
        operator=operator,
        bounded=tuple(bounded),
        registry_regularity=dict(case.regularity)
        if valid_registry and not any("unknowns" in lab for lab in labels)
        else {},
        registry_base=case.key,
        sharp_initial=case.sharp_initial,
        pressure=pressure,
    )


MANUFACTURED: dict[str, Callable[[np.random.Generator], Draw | None]] = {
    FAMILIES[0]: gen_linear,
    FAMILIES[1]: gen_semilinear,
    FAMILIES[2]: gen_conservation,
    FAMILIES[3]: gen_wave,
    FAMILIES[4]: gen_navier_stokes,
    FAMILIES[5]: gen_elliptic,
    FAMILIES[6]: gen_ode,
}


def new_draw(rng: np.random.Generator, family: str | None) -> Draw:
    fam = family or str(rng.choice(FAMILIES))
    for _ in range(12):
        draw = gen_registry(rng, fam) if rng.random() < 0.35 else MANUFACTURED[fam](rng)
        if draw is not None:
            return draw
    draw = gen_registry(rng, fam)
    assert draw is not None
    return draw


# ====================================================================== perturbations
@dataclass
class Perturbation:
    fields: tuple[Field, ...]
    periodic: bool
    zero_walls: bool
    zero_initial: int  # 0: no, 1: phi(t0) = 0, 2: phi and phi_t vanish at t0

    def describe(self) -> list[str]:
        return [sp.sstr(f.expr) for f in self.fields]


def random_perturbation(rng: np.random.Generator, draw: Draw) -> Perturbation:
    geo = draw.geometry()
    periodic = bool(rng.random() < 0.7)
    walls = [a for a in draw.axes if draw.boundary_kind(a) == "dirichlet"]
    zero_walls = bool(walls) and rng.random() < 0.3
    zero_initial = 0 if draw.steady or rng.random() >= 0.3 else (2 if rng.random() < 0.5 else 1)
    fmax = {0: 4.0, 1: 5.0, 2: 3.0, 3: 1.5}[len(draw.axes)]
    fields = []
    for i in range(len(draw.exact)):
        f = random_field(
            rng, geo, respect_periodic=periodic, fmax=fmax, max_terms=3 if len(draw.axes) < 3 else 2
        )
        if zero_walls and i != draw.pressure:
            for a in walls:
                lo, hi = geo.box[a]
                f = f.times(Bubble(a, sp.Rational(repr(lo)), sp.Rational(repr(hi))))
        if zero_initial and not draw.steady:
            t0 = sp.Rational(repr(geo.box["t"][0]))
            coeffs = (0, 1) if zero_initial == 1 else (0, 0, 1)
            f = f.times(Poly("t", t0, tuple(sp.Integer(c) for c in coeffs)))
        fields.append(f)
    return Perturbation(tuple(fields), periodic, zero_walls, zero_initial)


# ====================================================================== honest regularity
GRID = {1: (4001,), 2: (161, 161), 3: (41, 61, 61), 4: (13, 25, 25, 25)}


class Quantities:
    """Sups of the exact solution's and the model's quantities over the closed box."""

    def __init__(self, draw: Draw, pert: Perturbation, eps: float, case: ProbeCase) -> None:
        self.draw, self.pert, self.eps, self.case = draw, pert, eps, case
        geo = draw.geometry()
        self.geo = geo
        self.vars = tuple(str(v) for v in case.variables)
        shape = GRID[len(self.vars)]
        axes = [np.linspace(*geo.box[v], n) for v, n in zip(self.vars, shape, strict=True)]
        self.h = {
            v: (geo.box[v][1] - geo.box[v][0]) / (n - 1)
            for v, n in zip(self.vars, shape, strict=True)
        }
        self.shape = shape
        mesh = np.meshgrid(*axes, indexing="ij")
        self.cols = [m.ravel() for m in mesh]
        self._cache: dict[sp.Expr, np.ndarray] = {}
        self.methods: set[str] = set()

    def values(self, expr: sp.Expr) -> np.ndarray:
        if expr not in self._cache:
            f = sp.lambdify(tuple(SYMS[v] for v in self.vars), expr, modules="numpy")
            arr = np.asarray(f(*self.cols), dtype=float)
            self._cache[expr] = np.broadcast_to(arr, self.cols[0].shape).copy()
        return self._cache[expr]

    def _expr(self, i: int, alpha: Alpha, model: bool) -> sp.Expr:
        e = diff_alpha(self.draw.exact[i], alpha)
        if model:
            e = e + sp.Float(self.eps, 17) * diff_alpha(self.pert.fields[i].expr, alpha)
        return e

    def analytic(self, i: int, alpha: Alpha, model: bool) -> float | None:
        ex = self.draw.exact_fields[i]
        if ex is None:
            return None
        b = ex.bound(alpha, self.geo.box)
        if model:
            b += self.eps * self.pert.fields[i].bound(alpha, self.geo.box)
        return b

    def lipschitz(self, i: int, alpha: Alpha, model: bool) -> dict[str, float]:
        out = {}
        for v in self.vars:
            a = self.analytic(i, add(alpha, unit(v)), model)
            if a is None:
                self.methods.add("grid x2 derivative")
                a = 2.0 * float(
                    np.max(np.abs(self.values(self._expr(i, add(alpha, unit(v)), model))))
                )
            out[v] = a
        return out

    def correction(self, lips: Sequence[Mapping[str, float]]) -> float:
        """``sum_v h_v/2 * (sum_c L_{c,v}^2)^(1/2)`` for a vector of components."""
        return sum(self.h[v] / 2 * math.sqrt(sum(L[v] ** 2 for L in lips)) for v in self.vars)

    # ---------------------------------------------------------------- per-key quantities
    def scalar(
        self, i: int, alpha: Alpha, model: bool, kind: str
    ) -> tuple[np.ndarray, float, float | None]:
        """(pointwise values of the quantity, Lipschitz correction, analytic bound)."""
        vals = self.values(self._expr(i, alpha, model))
        q = {"abs": np.abs(vals), "neg": np.maximum(-vals, 0.0), "pos": np.maximum(vals, 0.0)}[kind]
        corr = self.correction([self.lipschitz(i, alpha, model)])
        return q, corr, self.analytic(i, alpha, model)

    def vector(
        self, comps: Sequence[tuple[int, Alpha]], model: bool
    ) -> tuple[np.ndarray, float, float | None]:
        vals = np.stack([self.values(self._expr(i, a, model)) for i, a in comps], axis=-1)
        q = np.linalg.norm(vals, axis=-1)
        corr = self.correction([self.lipschitz(i, a, model) for i, a in comps])
        an = [self.analytic(i, a, model) for i, a in comps]
        analytic = (
            None
            if any(v is None for v in an)
            else math.sqrt(sum(v * v for v in an if v is not None))
        )
        return q, corr, analytic

    def strain(self) -> tuple[np.ndarray, float, float | None]:
        axes = self.draw.axes
        d = len(axes)
        grads = [[self.values(self._expr(i, unit(a), False)) for a in axes] for i in range(d)]
        S = np.empty((self.cols[0].size, d, d))
        for j in range(d):
            for k in range(d):
                S[:, j, k] = 0.5 * (grads[j][k] + grads[k][j])
        q = np.linalg.eigvalsh(-S)[:, -1]
        lips = []
        for j in range(d):
            for k in range(d):
                a1 = self.lipschitz(j, unit(axes[k]), False)
                a2 = self.lipschitz(k, unit(axes[j]), False)
                lips.append({v: 0.5 * (a1[v] + a2[v]) for v in self.vars})
        corr = self.correction(lips)
        raw = [[self.analytic(j, unit(axes[k]), False) for k in range(d)] for j in range(d)]
        analytic = None
        if all(v is not None for row in raw for v in row):
            an = [[float(v or 0.0) for v in row] for row in raw]
            analytic = math.sqrt(
                sum((0.5 * (an[j][k] + an[k][j])) ** 2 for j in range(d) for k in range(d))
            )
        return np.maximum(q, 0.0), corr, analytic

    def residual(self, boundary: bool) -> tuple[np.ndarray, float, float | None]:
        """Interior residual of the model (elliptic keys) or the boundary residual."""
        if boundary:
            vals = np.abs(self.values(sp.Float(self.eps, 17) * self.pert.fields[0].expr))
            mask = np.zeros(vals.shape, dtype=bool)
            for col, v in zip(self.cols, self.vars, strict=True):
                lo, hi = self.geo.box[v]
                mask |= (col == lo) | (col == hi)
            q = np.where(mask, vals, 0.0)
            lip = {
                v: self.eps * self.pert.fields[0].bound(unit(v), self.geo.box) for v in self.vars
            }
            return q, self.correction([lip]), None
        model = tuple(self.case.model(self.eps))
        r = self.case.operator(model)[0]
        vals = np.abs(self.values(r))
        self.methods.add("grid x2 derivative")
        lip = {v: 2.0 * float(np.max(np.abs(self.values(sp.diff(r, SYMS[v]))))) for v in self.vars}
        return vals, self.correction([lip]), None

    def time_slices(self, q: np.ndarray) -> np.ndarray | None:
        if "t" not in self.vars:
            return None
        return np.asarray(q.reshape(self.shape[0], -1).max(axis=1))


def _resolve(quant: Quantities, key: str) -> tuple[np.ndarray, float, float | None] | None:
    draw = quant.draw
    names = list(draw.unknowns)
    if key in ("sup_abs_residual_interior", "sup_abs_residual_boundary"):
        return quant.residual(key.endswith("boundary"))
    if key == "sup_neg_strain":
        return quant.strain()
    if key in ("sup_abs_velocity", "sup_abs_model_velocity"):
        vel = [i for i in range(len(names)) if i != draw.pressure]
        return quant.vector([(i, ZERO) for i in vel], key.startswith("sup_abs_model"))
    m = re.match(_KEY_RE, key)
    if m is None or m.group(3) not in names:
        return None
    kind, is_model, name, derivs = m.groups()
    i = names.index(name)
    model = bool(is_model)
    if kind == "grad":
        return quant.vector([(i, unit(a)) for a in draw.axes], model)
    return quant.scalar(i, alpha_of(derivs.lstrip("_")), model, kind)


def honest_value(
    rng: np.random.Generator, quant: Quantities, key: str, notes: list[str]
) -> float | str | None:
    """A true upper bound of the key's quantity (see the module docstring), or None."""
    draw = quant.draw
    base_key = key.replace("_model_", "_", 1)
    reg = draw.registry_regularity
    if key in reg and rng.random() < 0.5:
        notes.append(f"{key}: registry")
        return _wire(reg[key])
    if (
        "_model_" in key
        and base_key in reg
        and rng.random() < 0.3
        and key not in ("sup_abs_model_velocity",)
    ):
        phi_bound = _phi_bound(quant, key)
        if phi_bound is not None:
            notes.append(f"{key}: registry + eps * analytic(phi)")
            base = reg[base_key]
            if isinstance(base, sp.Expr) and base.free_symbols:
                return f"{_wire(base)} + {quant.eps * phi_bound * (1 + INFLATE)!r}"
            return float(base) + quant.eps * phi_bound * (1 + INFLATE)
    found = _resolve(quant, key)
    if found is None:
        return None
    q, corr, analytic = found
    grid = float(np.max(q)) + corr
    value = grid if analytic is None else min(grid, analytic)
    notes.append(f"{key}: {'analytic' if analytic is not None and analytic <= grid else 'grid'}")
    value = value * (1 + INFLATE) + 1e-12
    slices = quant.time_slices(q)
    if slices is not None and rng.random() < 0.25:
        t0, T = quant.geo.box["t"]
        s = np.maximum(slices[:-1], slices[1:]) + corr
        ts = np.linspace(t0, T, slices.size)
        b = float((s[-1] - s[0]) / (T - t0))
        anchor = ts[:-1] if b >= 0 else ts[1:]
        a = float(np.max(s - b * (anchor - t0))) * (1 + INFLATE) + 1e-12
        notes.append(f"{key}: time-varying")
        return f"{a!r} + {b!r}*(t - {t0!r})"
    if rng.random() < 0.2:
        factor = float(rng.uniform(1.0, 4.0))
        notes.append(f"{key}: loosened x{factor:.3g}")
        return value * factor
    if rng.random() < 0.05 and slices is not None:
        notes.append(f"{key}: loosened + 0.3 sin(2t)^2")
        return f"{value!r} + 0.3*sin(2*t)^2"
    return value


def _phi_bound(quant: Quantities, key: str) -> float | None:
    m = re.match(_KEY_RE, key)
    if m is None:
        return None
    kind, _, name, derivs = m.groups()
    names = list(quant.draw.unknowns)
    if name not in names:
        return None
    f = quant.pert.fields[names.index(name)]
    box = quant.geo.box
    if kind == "grad":
        return math.sqrt(sum(f.bound(unit(a), box) ** 2 for a in quant.draw.axes))
    return f.bound(alpha_of(derivs.lstrip("_")), box)


def _wire(value: float | sp.Expr) -> float | str:
    if isinstance(value, sp.Expr) and value.free_symbols:
        return str(sp.sstr(value, full_prec=True))
    return float(value)


# ====================================================================== HTTP
@dataclass
class Stats:
    certificates: Counter[str] = field(default_factory=Counter)
    statuses: Counter[tuple[str, str]] = field(default_factory=Counter)
    min_eff: dict[tuple[str, str], float] = field(default_factory=dict)
    min_eff_where: dict[tuple[str, str], str] = field(default_factory=dict)
    codes: Counter[tuple[int, str]] = field(default_factory=Counter)
    hostile: Counter[str] = field(default_factory=Counter)
    draws: Counter[str] = field(default_factory=Counter)
    refused_problems: Counter[tuple[str, str]] = field(default_factory=Counter)
    probe_errors: int = 0
    seconds: defaultdict[tuple[str, str], float] = field(default_factory=lambda: defaultdict(float))
    findings: list[dict[str, Any]] = field(default_factory=list)
    sink: Path | None = None

    def add(self, finding: dict[str, Any]) -> None:
        """Record a finding (and append it to the sink file at once)."""
        self.findings.append(finding)
        if self.sink is not None:
            with self.sink.open("a", encoding="utf-8") as fh:
                fh.write(json.dumps(finding, default=str) + "\n")


class Service:
    """The service's app over a temporary SQLite store; 5xx are answered, not raised."""

    def __init__(self, stats: Stats) -> None:
        from boundsvc.api import build_app
        from boundsvc.settings import Settings
        from boundsvc.store import open_store
        from tests.inprocess import InProcessClient

        self._tmp = tempfile.TemporaryDirectory(prefix="boundsvc-probe-")
        self.store = open_store(f"sqlite:///{Path(self._tmp.name) / 'probe.sqlite3'}")
        settings = Settings(
            database_url="unused",
            host="127.0.0.1",
            rate_limit_per_minute=1_000_000,
            log_level="error",
        )
        self.client = InProcessClient(
            build_app(settings, self.store), raise_server_exceptions=False
        )
        self.stats = stats
        self.slow = 20.0

    def close(self) -> None:
        self.client.close()
        self.store.dispose()
        self._tmp.cleanup()

    def post(
        self,
        path: str,
        body: Any = None,
        *,
        context: Mapping[str, Any],
        content: bytes | None = None,
        headers: Mapping[str, str] | None = None,
    ) -> Any:
        began = time.monotonic()
        if content is not None:
            r = self.client.post(path, content=content, headers=dict(headers or {}))
        else:
            r = self.client.post(path, json=body)
        took = time.monotonic() - began
        self.stats.seconds[(path, str(context.get("step")))] += took
        if took > self.slow:
            self.stats.add(
                {
                    "kind": "slow request",
                    "seconds": round(took, 1),
                    "path": path,
                    "status": r.status_code,
                    **context,
                }
            )
            print(f"slow request {path} {context.get('step')}: {took:.0f}s", file=sys.stderr)
        return self.check(r, context)

    def get(self, path: str, *, context: Mapping[str, Any]) -> Any:
        return self.check(self.client.get(path), context)

    def check(self, r: Any, context: Mapping[str, Any]) -> Any:
        """Record the answer; 5xx and malformed 4xx bodies are findings."""
        status = int(r.status_code)
        if status < 400:
            return r
        ctype = r.headers.get("content-type", "")
        try:
            body = r.json()
        except ValueError:
            body = None
        code = body.get("code") if isinstance(body, dict) else None
        self.stats.codes[(status, str(code))] += 1
        problems = []
        if status >= 500:
            problems.append(f"HTTP {status}")
            if isinstance(body, dict) and not body.get("request_id"):
                problems.append("5xx without request_id")
            if "Traceback" in r.text:
                problems.append("5xx body carries a traceback")
        if not ctype.startswith("application/problem+json"):
            problems.append(f"content-type {ctype!r}")
        if not isinstance(code, str) or not code:
            problems.append("no code")
        if isinstance(body, dict) and body.get("status") != status:
            problems.append(f"body status {body.get('status')!r} != {status}")
        if problems:
            self.stats.add(
                {
                    "kind": "http",
                    "problems": problems,
                    "status": status,
                    "body": r.text[:3000],
                    **context,
                }
            )
        return r


# ====================================================================== residuals
def form_residuals(
    case: ProbeCase,
    eps: float,
    plan: Mapping[str, Any],
    draw: Draw,
    pert: Perturbation,
    points: Mapping[str, int],
    panels: Mapping[str, int],
) -> dict[str, np.ndarray]:
    """As the registry runner's ``form_residuals``, with periodic faces of unequal sizes."""
    time = case.time
    t0 = None if time is None else time[0]
    names = [str(v) for v in case.variables]
    out: dict[str, np.ndarray] = {}
    for comp in plan["components"]:
        name, axes = comp["name"], comp["axes"]
        pts = np.asarray(comp["points"], dtype=float).reshape(len(comp["weights"]), -1)
        by_axis = {a: pts[:, i] for i, a in enumerate(axes)}
        n = pts.shape[0]
        cols = [by_axis[a] if a in by_axis else np.full(n, t0) for a in names]
        base, _, wrt = name.partition("_")
        if name == "interior":
            vals = case.residual_fn(eps)(*cols)
        elif base in ("initial", "boundary"):
            vals = _deriv(case, [eps * p for p in case.perturbation], wrt)(*cols)
        elif base == "periodic":
            fn = _deriv(case, list(case.model(eps)), wrt)
            periodic = [a for a in draw.axes if draw.boundary_kind(a) == "periodic"]
            vals = np.empty((n, len(fn.exprs)))
            start = 0
            for axis in periodic:
                size = (points.get("t", 1) * panels.get("t", 1)) if "t" in names else 1
                for other in draw.axes:
                    if other != axis:
                        size *= points[other] * panels.get(other, 1)
                part = slice(start, start + size)
                k = names.index(axis)
                lo, hi = case.box[axis]
                if not np.allclose(cols[k][part], lo):
                    raise RuntimeError(f"unexpected layout of the periodic faces ({axis})")
                sub = [c[part] for c in cols]
                hi_cols = list(sub)
                hi_cols[k] = np.full_like(sub[k], hi)
                vals[part] = fn(*hi_cols) - fn(*sub)
                start += size
            if start != n:
                raise RuntimeError("periodic component size mismatch")
        else:
            raise RuntimeError(f"residual component {name!r} not formed by the probe")
        if pert.zero_walls and base == "boundary":
            vals = np.zeros_like(vals)  # phi vanishes on the walls exactly (bubble factor)
        if pert.zero_initial and name == "initial":
            vals = np.zeros_like(vals)
        if pert.zero_initial and base == "initial" and wrt in draw.axes:
            vals = np.zeros_like(vals)
        if pert.zero_initial == 2 and name == "initial_t":
            vals = np.zeros_like(vals)
        out[name] = vals[:, 0] if vals.shape[1] == 1 else vals
    return out


def _deriv(case: ProbeCase, exprs: list[sp.Expr], wrt: str) -> VectorFn:
    if wrt:
        var = next(v for v in case.variables if str(v) == wrt)
        exprs = [sp.diff(e, var) for e in exprs]
    return VectorFn(case.variables, exprs)


def encode(residuals: Mapping[str, np.ndarray]) -> dict[str, Any]:
    from boundsvc.client import encode_residuals

    return encode_residuals(residuals)


def b64(values: np.ndarray) -> dict[str, Any]:
    data = np.ascontiguousarray(values, dtype="<f8").tobytes()
    return {"dtype": "float64", "encoding": "base64", "data": base64.b64encode(data).decode()}


# ====================================================================== one certificate
@dataclass
class Attempt:
    draw: Draw
    case: ProbeCase
    pert: Perturbation
    eps: float
    points: dict[str, int]
    panels: dict[str, int]
    optional: list[str]
    regularity: dict[str, float | str]
    notes: list[str]
    info: dict[str, Any]
    fields_mode: bool = False
    fields_used: dict[str, list[str]] = field(default_factory=dict)

    def reproducer(self) -> dict[str, Any]:
        return {
            "family": self.draw.family,
            "label": self.draw.label,
            "problem": self.draw.problem,
            "plan": {
                "rule": "gauss-legendre",
                "points": self.points,
                "panels": self.panels,
                "optional_components": self.optional,
            },
            "regularity": self.regularity,
            "regularity_notes": self.notes,
            "eps": self.eps,
            "exact": [sp.sstr(e) for e in self.draw.exact],
            "perturbation": self.pert.describe(),
            "perturbation_flags": {
                "periodic": self.pert.periodic,
                "zero_walls": self.pert.zero_walls,
                "zero_initial": self.pert.zero_initial,
            },
            "bounded_unknowns": list(self.draw.bounded),
            "fields_mode": self.fields_used if self.fields_mode else None,
        }


#: plan caps per number of space axes (0: ODE), "t" and per space axis; steady problems: "s"
PLAN_CAPS = {0: {"t": 128}, 1: {"t": 32, "s": 96}, 2: {"t": 16, "s": 32}, 3: {"t": 8, "s": 12}}
STEADY_CAPS = {1: 128, 2: 48, 3: 16}
FINE = {0: {"t": 128}, 1: {"t": 48, "s": 128}, 2: {"t": 24, "s": 40}, 3: {"t": 12, "s": 16}}
STEADY_FINE = {1: 192, 2: 64, 3: 20}


def plan_points(
    rng: np.random.Generator, draw: Draw, pert: Perturbation, fine: bool = False
) -> tuple[dict[str, int], dict[str, int]]:
    """Random Gauss-Legendre points per axis: adequate for the frequencies (60 %) or anything
    within the caps (40 %); ``fine``: a resolved plan for the diagnosis."""
    d = len(draw.axes)
    geo = draw.geometry()
    pts: dict[str, int] = {}
    panels: dict[str, int] = {}
    fields = [f for f in draw.exact_fields if f is not None] + list(pert.fields)
    for v in geo.variables:
        if draw.steady:
            cap, fine_n = STEADY_CAPS[d], STEADY_FINE[d]
        else:
            which = "t" if v == "t" else "s"
            cap, fine_n = PLAN_CAPS[d][which], FINE[d][which]
        span = max([f.max_frequency(v, geo.box) for f in fields] + [4.0])
        adequate = int(min(256, max(6, span / 1.5 + 6)))
        if fine:
            pts[v] = min(256, max(fine_n, 2 * adequate), 2 * fine_n)
        elif rng.random() < 0.6:
            pts[v] = min(cap, adequate + int(rng.integers(0, 6)))
        else:
            # the service refuses fewer than 6 Gauss-Legendre nodes per panel (422); the
            # clamp keeps the random stream of earlier seeds
            pts[v] = max(6, int(rng.integers(2 if v == "t" else 3, cap + 1)))
    if not fine and not draw.steady and rng.random() < 0.2:
        panels["t"] = int(rng.integers(2, 4))
    return pts, panels


def _truth(case: ProbeCase, eps: float, draw: Draw, factor: float = 1.0) -> Any:
    d = len(draw.axes)
    n_space = {0: None, 1: 200, 2: 60, 3: 24}[d]
    n_time = TIME_NODES[d] if d < 3 else 64
    n_t = int(n_time * factor)
    n_s = None if n_space is None else int(n_space * factor)
    return true_error(case.error_fn(eps), case.time, case.box, n_time=n_t, n_space=n_s)


def certify_once(
    svc: Service,
    rng: np.random.Generator,
    draw: Draw,
    info: dict[str, Any],
    stats: Stats,
    ctx: dict[str, Any],
    hostile: float,
) -> None:
    # an independent stream for options added later, so that draws stay reproducible
    side_rng = np.random.default_rng([int(ctx["seed"]), int(ctx["draw"]), int(ctx["cert"]), 7])
    pert = random_perturbation(rng, draw)
    eps = float(10 ** rng.uniform(-5, math.log10(0.5)))
    case = ProbeCase(
        key="probe",
        family=draw.family,
        title=draw.label,
        source="probe",
        problem=draw.problem,
        exact=draw.exact,
        perturbation=tuple(f.expr for f in pert.fields),
        operator=draw.operator,
        bounded=draw.bounded,
        sharp_initial=draw.sharp_initial,
    )
    points, panels = plan_points(rng, draw, pert)
    optional = [c for c in info.get("optional_components", []) if rng.random() < 0.6]
    quant = Quantities(draw, pert, eps, case)
    notes: list[str] = []
    regularity: dict[str, float | str] = {}
    for req in info.get("regularity_requirements", []):
        if any(k in regularity for k in req["any_of"]):
            continue
        options = list(req["any_of"])
        rng.shuffle(options)
        for key in options:
            v = honest_value(rng, quant, key, notes)
            if v is not None:
                regularity[key] = v
                break
        else:
            stats.add(
                {"kind": "probe-skip", "detail": f"no computable key in {req['any_of']}", **ctx}
            )
            return
    for key in info.get("optional_regularity", []):
        if key not in regularity and rng.random() < 0.4:
            v = honest_value(rng, quant, key, notes)
            if v is not None:
                regularity[key] = v
    att = Attempt(
        draw,
        case,
        pert,
        eps,
        points,
        panels,
        optional,
        regularity,
        notes,
        info,
        fields_mode=bool(side_rng.random() < 0.12),
    )
    cert, plan = post_certificate(svc, att, ctx, rng, stats)
    if cert is None or plan is None:
        return
    evaluate(svc, att, cert, plan, stats, ctx)
    if rng.random() < hostile:
        hostile_request(svc, rng, att, plan, stats, ctx)


def _plan_body(
    att: Attempt, points: Mapping[str, int], panels: Mapping[str, int]
) -> dict[str, Any]:
    body: dict[str, Any] = {
        "problem_id": att.info["problem_id"],
        "rule": "gauss-legendre",
        "points": dict(points),
    }
    if panels:
        body["panels"] = dict(panels)
    if att.optional:
        body["optional_components"] = list(att.optional)
    return body


def post_certificate(
    svc: Service,
    att: Attempt,
    ctx: dict[str, Any],
    rng: np.random.Generator,
    stats: Stats,
    points: Mapping[str, int] | None = None,
    panels: Mapping[str, int] | None = None,
) -> tuple[dict[str, Any] | None, dict[str, Any] | None]:
    points = att.points if points is None else points
    panels = att.panels if panels is None else panels
    r = svc.post("/v1/plans", _plan_body(att, points, panels), context={**ctx, "step": "plan"})
    if r.status_code not in (200, 201):
        stats.refused_problems[(att.draw.family, f"plan {r.status_code} {_code(r)}")] += 1
        return None, None
    plan = r.json()
    residuals = form_residuals(att.case, att.eps, plan, att.draw, att.pert, points, panels)
    body: dict[str, Any] = {
        "problem_id": att.info["problem_id"],
        "plan_id": plan["plan_id"],
        "regularity": att.regularity,
        "residuals": encode(residuals),
        "model": {"name": "probe", "version": f"eps={att.eps:.6g}"},
    }
    if att.fields_mode:
        r = post_with_fields(svc, att, plan, body, ctx)
    else:
        r = svc.post(
            "/v1/certificates", body, context={**ctx, "step": "certify", **att.reproducer()}
        )
    if r.status_code == 422 and _code(r) in ("regularity_missing", "regularity_invalid"):
        # a conditionally needed key (e.g. periodicity mismatch): send every computable key
        quant = Quantities(att.draw, att.pert, att.eps, att.case)
        wanted = list(att.info.get("optional_regularity", []))
        for req in att.info.get("regularity_requirements", []):
            wanted += list(req["any_of"])
        wanted += re.findall(r"sup_[A-Za-z0-9_]+", _detail(r))
        for key in dict.fromkeys(wanted):
            if key not in att.regularity:
                v = honest_value(rng, quant, key, att.notes)
                if v is not None:
                    att.regularity[key] = v
        body["regularity"] = att.regularity
        stats.refused_problems[(att.draw.family, f"retry after {_code(r)}")] += 1
        r = svc.post(
            "/v1/certificates", body, context={**ctx, "step": "certify-retry", **att.reproducer()}
        )
    if r.status_code != 201:
        stats.refused_problems[
            (att.draw.family, f"certificate {r.status_code} {_code(r)}: {_detail(r)}")
        ] += 1
        return None, plan
    return r.json(), plan


def _columns(case: ProbeCase, comp: Mapping[str, Any]) -> list[np.ndarray]:
    time = case.time
    t0 = None if time is None else time[0]
    pts = np.asarray(comp["points"], dtype=float).reshape(len(comp["weights"]), -1)
    by_axis = {a: pts[:, i] for i, a in enumerate(comp["axes"])}
    n = pts.shape[0]
    return [by_axis.get(str(v), np.full(n, t0)) for v in case.variables]


def model_field(att: Attempt, comp: Mapping[str, Any], name: str) -> np.ndarray | None:
    """The model's value of ``name`` (``u``, ``u_xx``, ``y1_t``) at the component's points."""
    unknown, _, letters = name.partition("_")
    names = list(att.draw.unknowns)
    if unknown not in names or not set(letters) <= set(ALL_VARS):
        return None
    expr = diff_alpha(att.case.model(att.eps)[names.index(unknown)], alpha_of(letters))
    return np.asarray(VectorFn(att.case.variables, (expr,))(*_columns(att.case, comp))[:, 0])


def post_with_fields(
    svc: Service, att: Attempt, plan: Mapping[str, Any], body: dict[str, Any], ctx: dict[str, Any]
) -> Any:
    """Fields mode (docs/api.md): the model's values and derivatives instead of residuals for
    ``interior`` (and ``initial`` / ``boundary`` when the problem has their data); the field
    names are negotiated from the service's ``residual_missing`` / ``fields_invalid`` answers."""
    comps = {c["name"]: c for c in plan["components"]}
    problem = att.draw.problem
    chosen = ["interior"]
    if "initial_value" in problem and "initial" in comps:
        chosen.append("initial")
    if "boundary_value" in problem and "boundary" in comps and len(att.draw.unknowns) == 1:
        chosen.append("boundary")
    eqs = problem["equation"] if isinstance(problem["equation"], list) else [problem["equation"]]
    guess = set()
    for e in eqs:
        for name, letters in re.findall(r"\b([A-Za-z][A-Za-z0-9]*)((?:_[txyz]+)?)\b", e):
            if name in att.draw.unknowns:
                guess.add(name + letters)
    names: dict[str, set[str]] = {
        c: (set(guess) if c == "interior" else set(att.draw.unknowns)) for c in chosen
    }
    residuals = dict(body["residuals"])
    for c in chosen:
        residuals.pop(c, None)
    r = None
    for _ in range(12):
        fields: dict[str, Any] = {}
        for c in chosen:
            fields[c] = {}
            for n in sorted(names[c]):
                v = model_field(att, comps[c], n)
                if v is not None:
                    fields[c][n] = b64(v)
        trial = {**body, "residuals": residuals, "fields": fields}
        r = svc.post(
            "/v1/certificates", trial, context={**ctx, "step": "certify-fields", **att.reproducer()}
        )
        if r.status_code != 422 or _code(r) not in ("residual_missing", "fields_invalid"):
            break
        errors = r.json().get("errors") or [{}]
        where = str(errors[0].get("field") or "")
        parts = where.split(".")
        if len(parts) != 3 or parts[1] not in names:
            break
        if _code(r) == "residual_missing":
            names[parts[1]].add(parts[2])
        else:
            names[parts[1]].discard(parts[2])
    att.fields_used = {c: sorted(v) for c, v in names.items()}
    return r


def _code(r: Any) -> str:
    try:
        return str(r.json().get("code"))
    except (ValueError, AttributeError):
        return "?"


def _detail(r: Any) -> str:
    try:
        return str(r.json().get("detail"))[:300]
    except (ValueError, AttributeError):
        return "?"


def evaluate(
    svc: Service,
    att: Attempt,
    cert: dict[str, Any],
    plan: dict[str, Any],
    stats: Stats,
    ctx: dict[str, Any],
) -> None:
    fam = att.draw.family
    status = str(cert.get("status"))
    stats.certificates[fam] += 1
    stats.statuses[(fam, status)] += 1
    if cert.get("family") != att.draw.family:
        stats.statuses[(fam, f"classified as {cert.get('family')}")] += 1
    result = _result(att, cert, 1.0)
    ratios = [b / e for _, b, e in result.pairs() if b is not None and e > 0]
    if ratios and min(ratios) < 1.02:
        result = _result(att, cert, 1.5)  # re-check the truth at a finer rule
        ratios = [b / e for _, b, e in result.pairs() if b is not None and e > 0]
    if status == "invalid-hypotheses":
        stats.add(
            {
                "kind": "invalid-hypotheses with honest inputs",
                **ctx,
                **att.reproducer(),
                "warnings": cert.get("warnings"),
            }
        )
    if status not in ("valid", "vacuous"):
        return
    for kind, pairs in (
        ("space_time", [p for p in result.pairs() if p[0] in ("l2_space_time", "l2_space")]),
        ("final_time", [p for p in result.pairs() if p[0] == "l2_final_time"]),
        ("profile", [p for p in result.pairs() if p[0].startswith("profile")]),
    ):
        rs = [b / e for _, b, e in pairs if b is not None and e > 0]
        if rs and min(rs) < stats.min_eff.get((fam, kind), math.inf):
            stats.min_eff[(fam, kind)] = min(rs)
            stats.min_eff_where[(fam, kind)] = (
                f"draw {ctx.get('draw')} {att.draw.label} eps={att.eps:.3g}"
            )
    sup = (cert.get("bound") or {}).get("sup_space")
    if sup is not None:
        quant = Quantities(att.draw, att.pert, att.eps, att.case)
        lower = float(np.max(np.abs(quant.values(sp.Float(att.eps, 17) * att.pert.fields[0].expr))))
        if sup < lower * (1 - 1e-9):
            stats.add(
                {
                    "kind": "SOUNDNESS (sup_space)",
                    "sup_space": sup,
                    "sampled_sup_error": lower,
                    **ctx,
                    **att.reproducer(),
                }
            )
    bad = violations(result)
    if bad:
        finding = {
            "kind": "SOUNDNESS",
            "where": where_class(att, cert, bad),
            "violations": bad,
            "status": status,
            **ctx,
            **att.reproducer(),
            "certificate_bound": cert.get("bound"),
            "warnings": cert.get("warnings"),
            "terms": [
                (tm.get("name"), tm.get("value"), tm.get("rigor")) for tm in cert.get("terms", [])
            ],
            "truth": {
                "space_time": result.truth.space_time,
                "final_time": result.truth.final_time,
                "l2_space": result.truth.l2_space,
            },
        }
        finding["diagnosis"] = diagnose(svc, att, stats, ctx)
        stats.add(finding)
        print(f"!! SOUNDNESS draw {ctx.get('draw')} {att.draw.label}: {bad[:3]}", file=sys.stderr)


def violations(result: CaseResult) -> list[str]:
    """Bounds below the true error: relative slack ``ROUNDING`` and an absolute slack of 1e-13
    times the largest true error (a truth of 1e-17 where ``phi`` vanishes exactly is float
    noise, e.g. ``(t - t0) * ...`` evaluated at ``t0``)."""
    pairs = result.pairs()
    scale = max([e for _, _, e in pairs if math.isfinite(e)] + [0.0])
    return [
        f"{where}: bound {b!r} < true error {e!r}"
        for where, b, e in pairs
        if b is not None and b < e * (1 - ROUNDING) - 1e-13 * scale
    ]


def where_class(att: Attempt, cert: dict[str, Any], bad: Sequence[str]) -> str:
    """Where the violations are: the initial time, the first output time after it, or later."""
    tp = cert.get("time_profile") or {}
    times = [float(v) for v in tp.get("t", [])]
    found = set()
    for item in bad:
        m = re.match(r"profile t=([-0-9.e+]+):", item)
        if m is None:
            found.add("space-time/final/steady")
            continue
        tk = float(m.group(1))
        k = min(range(len(times)), key=lambda i: abs(times[i] - tk)) if times else -1
        found.add("t0" if k == 0 else "first output time after t0" if k == 1 else "later")
    return ", ".join(sorted(found))


def _result(att: Attempt, cert: dict[str, Any], factor: float) -> CaseResult:
    truth = _truth(att.case, att.eps, att.draw, factor)
    result = CaseResult(att.case, att.eps, cert, truth)
    tp = cert.get("time_profile")
    if tp:
        result.profile = [
            (float(tk), None if bk is None else float(bk), truth.at(float(tk)))
            for tk, bk in zip(tp["t"], tp["l2_error_bound"], strict=True)
        ]
    return result


def diagnose(svc: Service, att: Attempt, stats: Stats, ctx: dict[str, Any]) -> dict[str, Any]:
    """Re-certify with a fine plan: a bound then above the truth points at the quadrature."""
    out: dict[str, Any] = {}
    fine_pts, _ = plan_points(np.random.default_rng(0), att.draw, att.pert, fine=True)
    quiet = Stats()
    saved, svc.stats = svc.stats, quiet
    try:
        cert, _ = post_certificate(
            svc, att, {**ctx, "step": "diagnose"}, np.random.default_rng(0), quiet, fine_pts, {}
        )
    finally:
        svc.stats = saved
    if cert is None:
        out["fine_plan"] = "refused"
        return out
    res = _result(att, cert, 1.5)
    out["fine_plan"] = {
        "points": fine_pts,
        "status": cert.get("status"),
        "bound": cert.get("bound"),
        "violations": violations(res),
    }
    out["verdict"] = (
        "quadrature (heuristic residual integrals): the fine plan's bound holds"
        if not violations(res)
        else "bound below the truth on a fine plan too"
    )
    return out


# ====================================================================== hostile requests
def hostile_request(
    svc: Service,
    rng: np.random.Generator,
    att: Attempt,
    plan: dict[str, Any],
    stats: Stats,
    ctx: dict[str, Any],
) -> None:
    residuals = form_residuals(att.case, att.eps, plan, att.draw, att.pert, att.points, att.panels)
    base = {
        "problem_id": att.info["problem_id"],
        "plan_id": plan["plan_id"],
        "regularity": dict(att.regularity),
        "residuals": encode(residuals),
        "model": {"name": "probe-hostile", "version": "1"},
    }
    kinds = [
        "nan",
        "inf",
        "short",
        "missing",
        "extra",
        "unknown_key",
        "negative",
        "garbage",
        "pole",
        "huge_reg",
        "huge_res",
        "loosen",
        "bad_plan",
        "bad_problem",
        "no_problem",
        "no_plan",
        "not_json",
        "bad_b64",
        "float32",
        "list_value",
        "bool_value",
        "strings_in_residual",
        "empty_regularity",
        "reg_nan_text",
        "deep",
    ]
    kind = str(rng.choice(kinds))
    stats.hostile[kind] += 1
    body = copy.deepcopy(base)
    first = next(iter(residuals))
    arr = np.asarray(residuals[first], dtype=float)
    expect_refusal = True
    path = "/v1/certificates"
    content = None
    headers = None
    if kind in ("nan", "inf"):
        bad = arr.copy().ravel()
        bad[int(rng.integers(bad.size))] = np.nan if kind == "nan" else -np.inf
        body["residuals"][first] = b64(bad.reshape(arr.shape))
    elif kind == "short":
        body["residuals"][first] = b64(arr[:-1])
    elif kind == "missing":
        del body["residuals"][first]
    elif kind == "extra":
        body["residuals"]["interiour"] = b64(arr)
    elif kind == "unknown_key":
        body["regularity"]["sup_abs_qq_x"] = 1.0
    elif kind == "negative":
        if not body["regularity"]:
            body["regularity"]["sup_abs_u"] = -1.0
        else:
            body["regularity"][next(iter(body["regularity"]))] = -1.0
    elif kind == "garbage":
        if not body["regularity"]:
            return
        body["regularity"][next(iter(body["regularity"]))] = str(
            rng.choice(
                ["1/(t-", "__import__('os')", "t^^2", "sqrt(-1)", "u_x", "1e999", "log(0)", "x + 1"]
            )
        )
    elif kind == "pole":
        if not body["regularity"] or att.draw.steady:
            return
        t0, T = att.draw.problem["time"]
        body["regularity"][next(iter(body["regularity"]))] = f"1/({(t0 + T) / 2!r} - t)"
        expect_refusal = False
    elif kind == "huge_reg":
        if not body["regularity"]:
            return
        body["regularity"] = {k: 1e300 for k in body["regularity"]}
        expect_refusal = False
    elif kind == "huge_res":
        body["residuals"][first] = b64(arr * 0 + 1e200)
        expect_refusal = False
    elif kind == "loosen":
        body["regularity"] = {
            k: (v * 1e3 if isinstance(v, float) else f"1000*({v})")
            for k, v in body["regularity"].items()
        }
        body["model"]["version"] = "loosened"
        r = svc.post(path, body, context={**ctx, "step": "hostile-loosen", **att.reproducer()})
        if r.status_code == 201 and r.json().get("status") in ("valid", "vacuous"):
            res = _result(att, r.json(), 1.0)
            if violations(res):
                stats.add(
                    {
                        "kind": "SOUNDNESS (loosened x1000)",
                        "violations": violations(res),
                        **ctx,
                        **att.reproducer(),
                        "regularity_sent": body["regularity"],
                    }
                )
        return
    elif kind == "bad_plan":
        path = "/v1/plans"
        body = {
            "problem_id": att.info["problem_id"],
            "rule": "gauss-legendre",
            "points": {k: int(rng.choice([0, -3, 257, 10**9])) for k in att.points},
        }
    elif kind == "bad_problem":
        path = "/v1/problems"
        bad_problem = copy.deepcopy(att.draw.problem)
        choice = str(
            rng.choice(["reversed_time", "empty_box", "bad_text", "long", "unicode", "expand"])
        )
        if choice == "reversed_time" and "time" in bad_problem:
            bad_problem["time"] = bad_problem["time"][::-1]
        elif choice == "empty_box" and bad_problem.get("space"):
            a = next(iter(bad_problem["space"]))
            bad_problem["space"][a] = [1.0, 1.0]
        elif choice == "long":
            bad_problem["equation"] = "u_t = " + " + ".join(["u_xx"] * 900)
        elif choice == "unicode":
            bad_problem["equation"] = "u_t = u\u2212u_xx"
        elif choice == "expand":
            bad_problem["equation"] = "u_t = u_xx + (u + x + 1)^40*(u - x)^40"
        else:
            bad_problem["equation"] = "u_t = = u_xx("
        body = {"problem": bad_problem}
    elif kind == "no_problem":
        body["problem_id"] = "prb_" + "0" * 32
    elif kind == "no_plan":
        body["plan_id"] = "pln_" + "0" * 32
    elif kind == "not_json":
        content = b"{not json"
        headers = {"content-type": "application/json"}
    elif kind == "bad_b64":
        body["residuals"][first] = {"dtype": "float64", "encoding": "base64", "data": "@@@"}
    elif kind == "float32":
        comp = "boundary" if "boundary" in residuals else first
        body["residuals"][comp] = {
            "dtype": "float32",
            "encoding": "base64",
            "data": base64.b64encode(np.asarray(residuals[comp], "<f4").tobytes()).decode(),
        }
        expect_refusal = comp == "boundary"
    elif kind == "list_value":
        if not body["regularity"]:
            return
        body["regularity"][next(iter(body["regularity"]))] = [1.0, 2.0]
    elif kind == "bool_value":
        if not body["regularity"]:
            return
        body["regularity"][next(iter(body["regularity"]))] = True
    elif kind == "strings_in_residual":
        body["residuals"][first] = ["a"] * int(arr.shape[0])
    elif kind == "empty_regularity":
        if not att.info.get("regularity_requirements"):
            return
        body["regularity"] = {}
    elif kind == "reg_nan_text":
        if not body["regularity"]:
            return
        nan_reg = {k: float("nan") for k in body["regularity"]}
        content = json.dumps({**body, "regularity": nan_reg}).encode()
        headers = {"content-type": "application/json"}
    elif kind == "deep":
        if not body["regularity"]:
            return
        body["regularity"][next(iter(body["regularity"]))] = "(" * 200 + "1" + ")" * 200
    context = {**ctx, "step": f"hostile-{kind}"}
    r = svc.post(path, body, context=context, content=content, headers=headers)
    if r.status_code in (200, 201):
        doc = r.json()
        if kind == "negative" and doc.get("status") == "invalid-hypotheses":
            return
        if expect_refusal:
            stats.add(
                {
                    "kind": "hostile accepted",
                    "hostile": kind,
                    **context,
                    "status": doc.get("status"),
                    "bound": doc.get("bound"),
                    **att.reproducer(),
                }
            )
        elif path == "/v1/certificates":
            st = doc.get("status")
            bounds = [v for k, v in (doc.get("bound") or {}).items() if not k.startswith("log10")]
            if st not in ("valid", "vacuous", "invalid-hypotheses") or any(
                v is not None and (not math.isfinite(v) or v < 0) for v in bounds
            ):
                stats.add(
                    {
                        "kind": "hostile: odd certificate",
                        "hostile": kind,
                        **context,
                        "status": st,
                        "bound": doc.get("bound"),
                    }
                )


# ====================================================================== driver
def run_draw(
    svc: Service,
    seed: int,
    index: int,
    family: str | None,
    stats: Stats,
    hostile: float,
    max_certs: int,
) -> int:
    rng = np.random.default_rng([seed, index])
    draw = new_draw(rng, family)
    stats.draws[draw.family] += 1
    ctx = {"seed": seed, "draw": index}
    r = svc.post(
        "/v1/problems",
        {"problem": draw.problem},
        context={**ctx, "step": "problem", "problem": draw.problem, "label": draw.label},
    )
    if r.status_code not in (200, 201):
        key = (draw.family, f"problem {r.status_code} {_code(r)}")
        stats.refused_problems[key] += 1
        if stats.refused_problems[key] <= 5:
            stats.add(
                {
                    "kind": "problem refused",
                    **ctx,
                    "label": draw.label,
                    "problem": draw.problem,
                    "code": _code(r),
                    "detail": r.json().get("detail") if r.status_code < 500 else r.text,
                }
            )
        return 0
    info = r.json()
    n = int(rng.integers(1, max_certs + 1))
    done = 0
    for k in range(n):
        ctx["cert"] = k
        before = sum(stats.certificates.values())
        certify_once(svc, rng, draw, info, stats, ctx, hostile)
        done += sum(stats.certificates.values()) - before
    return done


def summary(stats: Stats, elapsed: float) -> dict[str, Any]:
    fams = sorted(set(stats.draws) | set(stats.certificates))
    return {
        "elapsed_seconds": round(elapsed, 1),
        "certificates_per_family": {f: stats.certificates[f] for f in fams},
        "draws_per_family": {f: stats.draws[f] for f in fams},
        "min_effectivity_per_family": {
            f: {k: stats.min_eff.get((f, k)) for k in ("space_time", "final_time", "profile")}
            for f in fams
        },
        "min_effectivity_where": {f"{f} {k}": w for (f, k), w in stats.min_eff_where.items()},
        "statuses": {f"{f}: {s}": n for (f, s), n in sorted(stats.statuses.items())},
        "http_4xx_5xx_codes": {f"{s} {c}": n for (s, c), n in sorted(stats.codes.items())},
        "hostile_requests": dict(stats.hostile),
        "refusals": {f"{f}: {what}": n for (f, what), n in sorted(stats.refused_problems.items())},
        "probe_errors": stats.probe_errors,
        "service_seconds": {
            f"{p} {st}": round(v, 1)
            for (p, st), v in sorted(stats.seconds.items(), key=lambda kv: -kv[1])[:12]
        },
        "findings_by_kind": dict(Counter(f["kind"] for f in stats.findings)),
    }


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--cases", type=int, default=100, help="certificates to run")
    parser.add_argument("--family", choices=FAMILIES, default=None)
    parser.add_argument("--draw", type=int, default=None, help="re-run only this draw index")
    parser.add_argument("--start", type=int, default=0, help="first draw index")
    parser.add_argument(
        "--hostile",
        type=float,
        default=0.15,
        help="probability of a hostile request after a certificate",
    )
    parser.add_argument("--max-certs-per-draw", type=int, default=3)
    parser.add_argument("--max-seconds", type=float, default=math.inf)
    parser.add_argument("--out", type=Path, default=None, help="findings as JSON lines")
    args = parser.parse_args(argv)
    import warnings

    warnings.simplefilter("ignore")
    stats = Stats(sink=args.out)
    svc = Service(stats)
    start = time.monotonic()
    done = 0
    index = args.start if args.draw is None else args.draw
    try:
        while done < args.cases and time.monotonic() - start < args.max_seconds:
            began = time.monotonic()
            try:
                done += run_draw(
                    svc, args.seed, index, args.family, stats, args.hostile, args.max_certs_per_draw
                )
            except Exception:
                stats.probe_errors += 1
                stats.add(
                    {
                        "kind": "probe-error",
                        "seed": args.seed,
                        "draw": index,
                        "traceback": traceback.format_exc()[-3000:],
                    }
                )
            took = time.monotonic() - began
            if took > 30:
                print(f"slow draw {index}: {took:.0f}s", file=sys.stderr)
            if args.draw is not None:
                break
            index += 1
            if index % 25 == 0:
                print(
                    f"[{time.monotonic() - start:7.1f}s] draws {index - args.start}, "
                    f"certificates {done}, findings {len(stats.findings)}",
                    file=sys.stderr,
                )
    finally:
        svc.close()
    report = summary(stats, time.monotonic() - start)
    report["next_draw"] = index
    print(json.dumps(report, indent=1, default=str))
    for finding in stats.findings:
        if finding["kind"] not in ("probe-skip",):
            print(json.dumps(finding, default=str)[:1500], file=sys.stderr)
    serious = [
        f for f in stats.findings if f["kind"].startswith("SOUNDNESS") or f["kind"] == "http"
    ]
    return 1 if serious else 0


if __name__ == "__main__":
    with contextlib.suppress(KeyboardInterrupt):
        sys.exit(main())
