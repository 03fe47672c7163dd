"""Gronwall's inequality with a time-varying rate, evaluated in log space.

If ``Y' <= a(t) Y + g(t)`` on ``[t0, T]`` (no sign condition on ``a`` or ``g``), then

    Y(t) <= exp(A(t0, t)) Y(t0) + int_{t0}^t exp(A(s, t)) g(s) ds,    A(s, t) = int_s^t a(r) dr,

the variation-of-constants form of Gronwall's lemma (Gronwall 1919; Bellman 1943; Evans,
"Partial Differential Equations", 2nd ed. 2010, App. B.2 (j)): multiply by exp(-A(t0, t)) and
integrate. The forcing ``g`` is only known at the Gauss-Legendre time nodes of a plan; on each
time panel it is replaced by its polynomial interpolant (the heuristic quadrature step, stated in
every certificate), and everything after that is computed to near machine precision:
``A`` by adaptive Gauss-Legendre with a 16/32-point error check, the convolution by 16-point
Gauss-Legendre on sub-intervals short enough that ``|A|`` changes by at most 2 across each.
Magnitudes are carried as ``(log scale, mantissa)`` pairs so that nothing overflows; a bound
beyond float64 is reported as vacuous, never as ``inf``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from boundsvc.quadrature import TimeGrid

FloatArray = NDArray[np.float64]

_X16, _W16 = np.polynomial.legendre.leggauss(16)
_X32, _W32 = np.polynomial.legendre.leggauss(32)
# The convolution is split into pieces across which the rate integral changes by at most
# _STEP_EXPONENT; 16-point Gauss-Legendre integrates exp(E s) times a degree-7 polynomial on
# such a piece to rounding for E up to 16 (measured against mpmath.quad: relative errors
# 3e-16 to 1.7e-15, docs/theory/gronwall.md), so 8 keeps a factor 2 in hand. The budget caps
# the total rate integral a propagation may cover at _STEP_EXPONENT * _MAX_SUBINTERVALS = 4e5.
_STEP_EXPONENT = 8.0
_MAX_SUBINTERVALS = 50_000
# log of the largest finite float64 (a squared bound beyond it cannot be represented)
LOG_FLOAT_MAX = math.log(np.finfo(np.float64).max)


class RateTooStiff(ArithmeticError):
    """The rate varies too fast to integrate with the sub-interval budget (becomes vacuous)."""


@dataclass(frozen=True)
class Rate:
    """The Gronwall rate ``a(t)``: a constant, or a vectorised function of time.

    ``poles`` lists the times in ``(t0, T]`` at which the rate diverges (computed from the
    regularity expressions); the bound ends at the first of them.
    """

    constant: float | None = None
    function: Callable[[FloatArray], FloatArray] | None = None
    poles: tuple[float, ...] = ()

    def __post_init__(self) -> None:
        if (self.constant is None) == (self.function is None):
            raise ValueError("a rate is either a constant or a function of time")

    def __call__(self, t: FloatArray) -> FloatArray:
        if self.constant is not None:
            return np.full_like(t, self.constant, dtype=np.float64)
        assert self.function is not None
        with np.errstate(all="ignore"):
            return np.asarray(self.function(t), dtype=np.float64)

    def shifted(self, delta: float) -> Rate:
        """The rate ``a(t) + delta``."""
        if self.constant is not None:
            return Rate(constant=self.constant + delta, poles=self.poles)
        base = self.function
        assert base is not None
        return Rate(function=lambda t: base(t) + delta, poles=self.poles)

    def integral(self, lower: FloatArray, upper: FloatArray) -> FloatArray:
        """``int_lower^upper a`` elementwise, rounded up by the estimated quadrature error."""
        lower = np.asarray(lower, dtype=np.float64)
        upper = np.asarray(upper, dtype=np.float64)
        if self.constant is not None:
            return self.constant * (upper - lower)
        return _adaptive_integral(self, lower, upper, depth=0)


_X48 = np.concatenate([_X16, _X32])


def _gauss_pair(rate: Rate, lower: FloatArray, upper: FloatArray) -> tuple[FloatArray, FloatArray]:
    """16- and 32-point Gauss-Legendre integrals of the rate, from one evaluation of it."""
    mid = 0.5 * (lower + upper)
    half = 0.5 * (upper - lower)
    values = rate(mid[:, None] + half[:, None] * _X48[None, :])
    coarse = half * (values[:, :16] * _W16[None, :]).sum(axis=1)
    fine = half * (values[:, 16:] * _W32[None, :]).sum(axis=1)
    return np.asarray(coarse, dtype=np.float64), np.asarray(fine, dtype=np.float64)


def _adaptive_integral(rate: Rate, lower: FloatArray, upper: FloatArray, depth: int) -> FloatArray:
    coarse, fine = _gauss_pair(rate, lower, upper)
    error = np.abs(fine - coarse)
    result = fine + error  # round the exponent up: a larger rate integral is the safe side
    bad = ~(error <= 1e-11 * (1.0 + np.abs(fine)))  # also catches NaN
    if np.any(bad):
        if depth >= 40:
            raise RateTooStiff("the Gronwall rate could not be integrated to the required accuracy")
        # both halves of every unresolved interval in one call (breadth first): the same
        # elementwise arithmetic as two recursive calls, with half the Python overhead per level
        lo, hi = lower[bad], upper[bad]
        mid = 0.5 * (lo + hi)
        halves = _adaptive_integral(
            rate, np.concatenate([lo, mid]), np.concatenate([mid, hi]), depth + 1
        )
        result[bad] = halves[: lo.size] + halves[lo.size :]
    return result


@dataclass(frozen=True)
class Propagation:
    """Bounds on ``Y`` at the output times: total and per-source shares.

    ``log_y[k]`` is the log of the bound on ``Y(times[k])`` (``-inf`` for zero, ``nan`` after the
    bound ended); ``contributions[name][k]`` is the part of ``Y(times[k])`` due to that source
    (initial value or forcing), as a fraction of the total; ``finite_until`` is the last time
    the bound is a finite float64 number (``None`` when it is finite on the whole interval).
    """

    times: FloatArray
    log_y: FloatArray
    node_mask: NDArray[np.bool_]
    shares: Mapping[str, FloatArray]
    finite_until: float | None
    ended_by: str | None
    log_space_time: float
    ended_at: float | None = None
    space_time_shares: Mapping[str, float] = field(default_factory=dict)


class _LinearInterpolant:
    """Piecewise-linear interpolation through the nodes, constant beyond the end nodes."""

    def __init__(self, nodes: FloatArray, values: FloatArray) -> None:
        self.nodes = nodes
        self.values = values

    def __call__(self, s: FloatArray) -> FloatArray:
        return np.stack(
            [np.interp(s, self.nodes, self.values[:, k]) for k in range(self.values.shape[1])],
            axis=-1,
        )


class _PanelInterpolant:
    """The panel polynomial through the nodes, guarded where it extrapolates.

    Between a panel edge and the panel's first (or last) Gauss-Legendre node the polynomial is
    an extrapolation, and on the first panel that segment carries the whole bound at the first
    node (the initial value and the forcing on ``[t0, t_1]``). An extrapolated polynomial can
    fall well below the forcing there (a randomized probe found bounds below the true error at
    the first node, down to 0 where the polynomial went negative and was clipped). On those
    end segments the value is ``max(polynomial, value at the nearest node)``: never smaller
    than the plain interpolant, so it can only enlarge the bound (docs/theory/gronwall.md).
    """

    def __init__(self, nodes: FloatArray, values: FloatArray) -> None:
        self.nodes = np.asarray(nodes, dtype=np.float64)
        self.values = np.asarray(values, dtype=np.float64).reshape(self.nodes.size, -1)
        self.lo, self.hi = float(self.nodes[0]), float(self.nodes[-1])
        self.first, self.last = self.values[0], self.values[-1]
        # barycentric weights 1 / prod_{k != j} (x_j - x_k) (Berrut & Trefethen, SIAM Review 46
        # (2004), eq. 3.2), computed as sums of logs and scaled by a common factor (which
        # cancels in the second barycentric formula): no product can overflow, whatever the
        # number of nodes, and the order is fixed (scipy's BarycentricInterpolator multiplies
        # in a random order against overflow, so its weights, and a bound, differed between
        # two runs in the last digits)
        diff = self.nodes[:, None] - self.nodes[None, :]
        np.fill_diagonal(diff, 1.0)
        log_w = -np.sum(np.log(np.abs(diff)), axis=1)
        sign = np.where(np.sum(diff < 0, axis=1) % 2 == 1, -1.0, 1.0)
        self.weights = sign * np.exp(log_w - np.max(log_w))

    def polynomial(self, s: FloatArray) -> FloatArray:
        """The interpolating polynomial at ``s`` (shape ``(len(s), sources)``), by the second
        barycentric formula (Berrut & Trefethen 2004, eq. 4.2); exact at the nodes."""
        diff = s[:, None] - self.nodes[None, :]
        hit = diff == 0
        c = self.weights / np.where(hit, 1.0, diff)
        out = (c @ self.values) / c.sum(axis=1)[:, None]
        if hit.any():
            rows, node = np.nonzero(hit)
            out[rows] = self.values[node]
        return np.asarray(out, dtype=np.float64)

    def __call__(self, s: FloatArray) -> FloatArray:
        s = np.asarray(s, dtype=np.float64).ravel()
        out = self.polynomial(s)
        before, after = s < self.lo, s > self.hi
        if np.any(before):
            out[before] = np.maximum(out[before], self.first)
        if np.any(after):
            out[after] = np.maximum(out[after], self.last)
        return out


def panel_polynomial(nodes: FloatArray, values: FloatArray, s: FloatArray) -> FloatArray:
    """The polynomial through ``(nodes, values)`` (rows: nodes) at ``s``, evaluated as the
    propagation evaluates its forcing (without the end-segment guard)."""
    return _PanelInterpolant(nodes, values).polynomial(np.asarray(s, dtype=np.float64).ravel())


def output_times(grid: TimeGrid) -> tuple[FloatArray, NDArray[np.bool_], NDArray[np.int64]]:
    """Panel edges and nodes in increasing order; which are nodes; and each point's panel."""
    if grid.mode == "linear":
        ends = [
            t
            for t in (grid.t0, grid.t_end)
            if not np.any(np.isclose(grid.nodes, t, rtol=0, atol=0))
        ]
        times_l = np.sort(np.concatenate([grid.nodes, np.array(ends)]))
        nodes_set = set(grid.nodes.tolist())
        mask = np.array([t in nodes_set for t in times_l.tolist()])
        return times_l, mask, np.zeros(times_l.size, dtype=np.int64)
    times: list[float] = [float(grid.edges[0])]
    is_node: list[bool] = [False]
    panel: list[int] = [0]
    n = grid.nodes_per_panel
    for m in range(grid.edges.size - 1):
        for j in range(n):
            times.append(float(grid.nodes[m * n + j]))
            is_node.append(True)
            panel.append(m)
        times.append(float(grid.edges[m + 1]))
        is_node.append(False)
        panel.append(m)
    return np.array(times), np.array(is_node), np.array(panel, dtype=np.int64)


def propagate(
    grid: TimeGrid,
    rate: Rate,
    initial: float,
    forcing: Mapping[str, FloatArray],
    nonnegative: Sequence[str] = (),
) -> Propagation:
    """Bound ``Y`` on the plan's time grid from ``Y' <= a Y + sum_src g_src``, ``Y(t0) <= initial``.

    ``forcing[src]`` holds ``g_src`` at the time nodes; sources named in ``nonnegative`` are
    known to be >= 0 (squared norms), and their interpolants are clipped at 0 (which only
    enlarges the bound).
    """
    times, is_node, panel_of = output_times(grid)
    names = ["initial", *forcing]
    n = grid.nodes_per_panel
    interpolants: list[Callable[[FloatArray], FloatArray] | None] = []
    stacked = (
        np.stack([np.asarray(forcing[k], dtype=np.float64) for k in forcing], axis=1)
        if forcing
        else np.zeros((grid.size, 0))
    )
    # Every source is clipped at 0 after interpolation, signed ones too: a negative (outflow)
    # contribution is only known at the time nodes, and crediting its interpolant between them
    # can drive the bound below the true error (seen for networks evaluated far outside their
    # training window). Clipping can only enlarge the bound. ``nonnegative`` is kept for
    # callers; it no longer changes the result.
    del nonnegative
    clip = np.ones(len(forcing), dtype=bool)
    if grid.mode == "linear":
        interpolants.append(_LinearInterpolant(grid.nodes, stacked) if stacked.shape[1] else None)
    else:
        for m in range(grid.edges.size - 1):
            xs = grid.nodes[m * n : (m + 1) * n]
            ys = stacked[m * n : (m + 1) * n]
            interpolants.append(_PanelInterpolant(xs, ys) if ys.shape[1] else None)

    first_pole = min((p for p in rate.poles if p > times[0]), default=None)
    log_y = np.full(times.size, np.nan)
    shares = {name: np.full(times.size, np.nan) for name in names}
    # Representation: Y_src = v[src] * exp(scale); the clamped total is tracked separately.
    v = np.zeros(len(names))
    v[0] = initial
    total = max(initial, 0.0)
    scale = 0.0
    log_y[0] = math.log(total) if total > 0 else -math.inf
    _record_shares(shares, names, v, 0)
    finite_until: float | None = None
    ended_by: str | None = None
    ended_at: float | None = None
    budget = [_MAX_SUBINTERVALS]
    # steps before the first pole; their rate integrals and forcing contributions are computed
    # for all steps at once (``None`` when that fails: then step by step, as the loop did)
    n_steps = times.size - 1
    if first_pole is not None:
        n_steps = int(np.searchsorted(times[1:], first_pole, side="left"))
    batch = _batched_steps(rate, times, n_steps, panel_of, interpolants, clip)
    fast = _unrolled(batch, initial, len(names)) if batch is not None else None
    for k in range(1, times.size):
        if fast is not None:
            # same control flow as below, on the unrolled values (no state carried)
            p, q = float(times[k - 1]), float(times[k])
            if first_pole is not None and q >= first_pole:
                finite_until, ended_by, ended_at = p, "rate-pole", first_pole
                break
            log_values, share_rows = fast
            if k - 1 >= log_values.size:
                finite_until, ended_by, ended_at = p, "rate-too-stiff", q
                break
            value = float(log_values[k - 1])
            if math.isnan(value) or value > LOG_FLOAT_MAX:
                finite_until, ended_by, ended_at = p, "overflow", q
                break
            log_y[k] = value
            for i, name in enumerate(names):
                shares[name][k] = share_rows[k - 1, i]
            continue
        p, q = float(times[k - 1]), float(times[k])
        if first_pole is not None and q >= first_pole:
            finite_until, ended_by, ended_at = p, "rate-pole", first_pole
            break
        try:
            if batch is None:
                scale, v, total = _advance(
                    rate, p, q, interpolants[panel_of[k]], clip, scale, v, total, budget
                )
            elif k - 1 < len(batch):
                d_log, contrib = batch[k - 1]
                scale, v, total = _combine(d_log, contrib, scale, v, total)
            else:
                raise RateTooStiff("the rate is not finite or needs too many sub-intervals")
        except RateTooStiff:
            finite_until, ended_by, ended_at = p, "rate-too-stiff", q
            break
        value = math.log(total) + scale if total > 0 else -math.inf
        if not math.isfinite(scale) or value > LOG_FLOAT_MAX:
            finite_until, ended_by, ended_at = p, "overflow", q
            break
        log_y[k] = value
        _record_shares(shares, names, v, k)

    log_space_time = -math.inf
    st_shares: dict[str, float] = {}
    if ended_by is None:
        node_idx = np.flatnonzero(is_node)
        with np.errstate(divide="ignore"):
            terms = np.log(grid.weights) + log_y[node_idx]
        log_space_time = float(_logsumexp(terms))
        weights_node = np.exp(terms - log_space_time) if math.isfinite(log_space_time) else None
        for name in names:
            st_shares[name] = (
                float(np.sum(weights_node * shares[name][node_idx]))
                if weights_node is not None
                else math.nan
            )
    else:
        log_space_time = math.inf
    return Propagation(
        times=times,
        log_y=log_y,
        node_mask=is_node,
        shares=shares,
        finite_until=finite_until,
        ended_by=ended_by,
        log_space_time=log_space_time,
        space_time_shares=st_shares,
        ended_at=ended_at,
    )


def _record_shares(
    shares: dict[str, FloatArray], names: Sequence[str], v: FloatArray, k: int
) -> None:
    denom = float(np.sum(v))
    for i, name in enumerate(names):
        shares[name][k] = float(v[i] / denom) if denom > 0 else (1.0 if i == 0 else 0.0)


def _logsumexp(values: FloatArray) -> float:
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return -math.inf
    top = float(np.max(finite))
    return top + math.log(float(np.sum(np.exp(finite - top))))


def _advance(
    rate: Rate,
    p: float,
    q: float,
    interp: Callable[[FloatArray], FloatArray] | None,
    clip: NDArray[np.bool_],
    scale: float,
    v: FloatArray,
    total: float,
    budget: list[int],
) -> tuple[float, FloatArray, float]:
    """Advance the bound from time ``p`` to ``q`` (both in one panel)."""
    whole = float(rate.integral(np.array([p]), np.array([q]))[0])
    if not math.isfinite(whole):
        raise RateTooStiff("the rate is not finite on the interval")
    if abs(whole) > _STEP_EXPONENT * budget[0]:  # also guards the int conversion below
        raise RateTooStiff("the rate needs more sub-intervals than the budget allows")
    pieces = max(1, math.ceil(abs(whole) / _STEP_EXPONENT))
    budget[0] -= pieces
    if budget[0] < 0:
        raise RateTooStiff("the rate needs more sub-intervals than the budget allows")
    edges = np.linspace(p, q, pieces + 1)
    a, b = edges[:-1], edges[1:]
    d_log = rate.integral(a, b)
    mid = 0.5 * (a + b)
    half = 0.5 * (b - a)
    s = mid[:, None] + half[:, None] * _X16[None, :]  # (pieces, 16)
    # exponent int_s^b a for every quadrature node s of every piece
    expo = rate.integral(s.ravel(), np.repeat(b, _X16.size)).reshape(s.shape)
    if interp is not None:
        g = np.asarray(interp(s.ravel()), dtype=np.float64).reshape(*s.shape, -1)
        if np.any(clip):
            g[..., clip] = np.maximum(g[..., clip], 0.0)
        contrib = np.einsum("pq,pqs->ps", half[:, None] * _W16[None, :] * np.exp(expo), g)
    else:
        contrib = np.zeros((pieces, 0))
    return _combine(d_log, contrib, scale, v, total)


def _batched_steps(
    rate: Rate,
    times: FloatArray,
    n_steps: int,
    panel_of: NDArray[np.int64],
    interpolants: Sequence[Callable[[FloatArray], FloatArray] | None],
    clip: NDArray[np.bool_],
) -> list[tuple[FloatArray, FloatArray]] | None:
    """``(d_log, contrib)`` of every step ``times[k] -> times[k+1]``, ``k < n_steps``, exactly
    as :func:`_advance` computes them one step at a time, but with one rate integral for all
    steps (the integrals and the interpolation are elementwise, so batching changes no value).

    The list stops before the first step at which :func:`_advance` would raise (non-finite
    rate integral or sub-interval budget exhausted). ``None``: a rate integral failed to
    converge somewhere; the caller then goes step by step to find where.
    """
    if n_steps <= 0:
        return []
    lower, upper = times[:n_steps].astype(np.float64), times[1 : n_steps + 1].astype(np.float64)
    try:
        whole = rate.integral(lower, upper)
    except RateTooStiff:
        return None
    finite = np.isfinite(whole)
    usable = n_steps if finite.all() else int(np.argmin(finite))
    # counted in float first: a huge rate integral (regularity values like 1e25) would
    # overflow the int64 cast; anything beyond the budget ends the batch there
    counts = np.maximum(1.0, np.ceil(np.abs(whole[:usable]) / _STEP_EXPONENT))
    too_many = np.flatnonzero(np.cumsum(counts) > _MAX_SUBINTERVALS)
    if too_many.size:
        usable = int(too_many[0])
    pieces = counts[:usable].astype(np.int64)
    over = np.flatnonzero(np.cumsum(pieces) > _MAX_SUBINTERVALS)
    if over.size:
        usable = int(over[0])
    if usable == 0:
        return []
    pieces = pieces[:usable]
    edges = [
        np.linspace(float(lower[k]), float(upper[k]), int(pieces[k]) + 1) for k in range(usable)
    ]
    a = np.concatenate([e[:-1] for e in edges])
    b = np.concatenate([e[1:] for e in edges])
    try:
        d_log = rate.integral(a, b)
        mid = 0.5 * (a + b)
        half = 0.5 * (b - a)
        s = mid[:, None] + half[:, None] * _X16[None, :]
        expo = rate.integral(s.ravel(), np.repeat(b, _X16.size)).reshape(s.shape)
    except RateTooStiff:
        return None
    step_of = np.repeat(np.arange(usable), pieces)
    n_src = int(clip.size)
    contrib = np.zeros((a.size, n_src))
    if n_src:
        g = np.zeros((*s.shape, n_src))
        piece_panel = panel_of[1 : usable + 1][step_of]
        for m in np.unique(piece_panel).tolist():
            interp = interpolants[m]
            if interp is None:
                continue
            rows = np.flatnonzero(piece_panel == m)
            g[rows] = np.asarray(interp(s[rows].ravel()), dtype=np.float64).reshape(
                rows.size, _X16.size, -1
            )
        if np.any(clip):
            g[..., clip] = np.maximum(g[..., clip], 0.0)
        contrib = np.einsum("pq,pqs->ps", half[:, None] * _W16[None, :] * np.exp(expo), g)
    bounds = np.concatenate([[0], np.cumsum(pieces)])
    return [
        (d_log[bounds[k] : bounds[k + 1]], contrib[bounds[k] : bounds[k + 1]])
        for k in range(usable)
    ]


def _unrolled(
    batch: list[tuple[FloatArray, FloatArray]], initial: float, n_names: int
) -> tuple[FloatArray, FloatArray] | None:
    """The bound at every step end from the pieces of all steps at once.

    Unrolling ``Y(b_i) = exp(d_i) Y(a_i) + c_i`` over all pieces ``i`` (all steps), with
    ``D_j = d_0 + ... + d_j``: ``Y_src(b_j) = exp(D_j) (Y_src(t0) + sum_{i<=j} c_i,src exp(-D_i))``,
    the same sum the piece-by-piece recursion forms (up to rounding). In log space the inner sum is
    a running log-sum-exp (``np.logaddexp.accumulate``), so nothing overflows. Returns the log of
    the total and the shares of the sources at each usable step end (the list stops at a step whose
    contribution is not finite: the recursion raises there), or ``None`` when the unrolled form
    does not apply (negative initial value, a non-finite exponent): then step by step.
    """
    if initial < 0.0:
        return None
    if not batch:
        return np.zeros(0), np.zeros((0, n_names))
    d_all = np.concatenate([d for d, _ in batch])
    c_all = np.concatenate([c for _, c in batch])
    ends = np.cumsum([d.size for d, _ in batch]) - 1
    bad_c = ~np.isfinite(c_all).all(axis=1) if c_all.size else np.zeros(d_all.size, dtype=bool)
    usable = len(batch)
    if np.any(bad_c):
        usable = int(np.searchsorted(ends, int(np.argmax(bad_c)), side="left"))
        if usable == 0:
            return np.zeros(0), np.zeros((0, n_names))
        n_pieces = int(ends[usable - 1]) + 1
        d_all, c_all, ends = d_all[:n_pieces], c_all[:n_pieces], ends[:usable]
    if not np.all(np.isfinite(d_all)) or np.any(c_all < 0.0):
        return None
    cum = np.cumsum(d_all)
    with np.errstate(divide="ignore"):
        log_src = np.empty((d_all.size, n_names))
        log_src[:, 0] = math.log(initial) if initial > 0 else -math.inf
        if n_names > 1:
            terms = np.log(c_all) - cum[:, None]
            log_src[:, 1:] = np.logaddexp.accumulate(terms, axis=0)
    log_src = log_src[ends] + cum[ends][:, None]
    top = np.max(log_src, axis=1)
    finite_top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(invalid="ignore"):
        rel = np.exp(log_src - finite_top[:, None])
    mass = rel.sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_total = np.where(top == -math.inf, -math.inf, finite_top + np.log(mass))
        share_rows = np.where(mass[:, None] > 0, rel / mass[:, None], 0.0)
    share_rows[top == -math.inf] = np.eye(1, n_names)[0]
    return log_total, share_rows


def _combine(
    d_log: FloatArray, contrib: FloatArray, scale: float, v: FloatArray, total: float
) -> tuple[float, FloatArray, float]:
    """Apply the pieces of one step: ``Y(b_i) = exp(d_log_i) Y(a_i) + contrib_i``."""
    pieces = int(d_log.size)
    for i in range(pieces):
        # Y(b_i) = exp(d_log_i) Y(a_i) + contrib_i   (variation of constants on [a_i, b_i]);
        # choose the new scale so that both summands have magnitude <= 1 before adding.
        c = contrib[i]
        if not np.all(np.isfinite(c)):
            raise RateTooStiff("a forcing contribution overflowed")
        s_v = scale + float(d_log[i])
        c_max = float(np.max(np.abs(c))) if c.size else 0.0
        s_new = s_v if c_max == 0.0 else max(s_v, math.log(c_max))
        keep = math.exp(s_v - s_new)
        v = v * keep
        total = total * keep
        if c_max > 0.0:
            inc = (c / c_max) * math.exp(math.log(c_max) - s_new)
            v[1:] += inc
            total += float(np.sum(inc))
        total = max(total, 0.0)
        scale = s_new
        norm = max(float(np.max(np.abs(v))), total)
        if norm > 0:
            scale += math.log(norm)
            v = v / norm
            total = total / norm
        else:
            scale = 0.0
    return scale, v, total
