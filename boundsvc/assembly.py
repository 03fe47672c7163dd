"""From an energy inequality to the certified bound: Young weight, Gronwall, terms, status."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import cast

import numpy as np
from numpy.typing import NDArray

from boundsvc.families._base import (
    EnergyInequality,
    NormAddition,
    Rigor,
    SourceInfo,
    SteadyBound,
    weakest,
)
from boundsvc.gronwall import LOG_FLOAT_MAX, Propagation, propagate
from boundsvc.quadrature import TimeGrid

FloatArray = NDArray[np.float64]

_GRID = np.geomspace(1e-4, 1e4, 33)
_GOLDEN = (math.sqrt(5) - 1) / 2


@dataclass
class BoundResult:
    """The numbers of a certificate and the terms that make them up."""

    status: str
    l2_space_time: float | None
    l2_final_time: float | None
    log10_l2_space_time: float | None
    log10_l2_final_time: float | None
    profile_t: list[float]
    profile_bound: list[float | None]
    vacuous_from: float | None
    ended_by: str | None
    terms: list[dict[str, object]]
    young_weight: dict[str, float | None]
    warnings: list[str] = field(default_factory=list)
    rigor: str = "heuristic"
    l2_space: float | None = None
    sup_space: float | None = None


def steady_result(steady: SteadyBound) -> BoundResult:
    """A steady theorem's bound in the shape of a certificate (no time profile)."""
    return BoundResult(
        status="valid" if math.isfinite(steady.l2_space) else "vacuous",
        l2_space_time=None,
        l2_final_time=None,
        log10_l2_space_time=None,
        log10_l2_final_time=None,
        profile_t=[],
        profile_bound=[],
        vacuous_from=None,
        ended_by=None,
        terms=steady.terms,
        young_weight={},
        warnings=list(steady.warnings),
        rigor=weakest(steady.rigor, *[cast(Rigor, t["rigor"]) for t in steady.terms]),
        l2_space=steady.l2_space if math.isfinite(steady.l2_space) else None,
        sup_space=steady.sup_space,
    )


def _run(ineq: EnergyInequality, grid: TimeGrid, lam: float) -> Propagation:
    forcing = dict(ineq.forcing)
    nonneg = list(ineq.nonnegative)
    rate = ineq.base_rate
    if ineq.residual is not None:
        forcing = {"interior": ineq.residual / lam, **forcing}
        nonneg.append("interior")
        rate = rate.shifted(lam)
    return propagate(grid, rate, ineq.initial, forcing, nonnegative=nonneg)


def final_log_at(ineq: EnergyInequality, grid: TimeGrid, lam: float) -> float:
    """log of the final-time bound on Y for one Young weight (no search)."""
    return float(_run(ineq, grid, lam).log_y[-1])


def _refine(
    ineq: EnergyInequality, grid: TimeGrid, best: float, key: str, cache: dict[float, Propagation]
) -> float:
    """Golden-section search in log(lambda) around ``best`` for the final or space-time bound."""

    def objective(log_lam: float) -> float:
        lam = math.exp(log_lam)
        if lam not in cache:
            cache[lam] = _run(ineq, grid, lam)
        prop = cache[lam]
        value = prop.log_y[-1] if key == "final" else prop.log_space_time
        return float(value) if math.isfinite(value) or value == -math.inf else math.inf

    lo, hi = math.log(best) - math.log(10) / 2, math.log(best) + math.log(10) / 2
    if ineq.young_cap is not None:  # the weight may not exceed the cap (H^-1 estimates)
        hi = min(hi, math.log(ineq.young_cap))
        lo = min(lo, hi - math.log(10) / 2)
    a = hi - _GOLDEN * (hi - lo)
    b = lo + _GOLDEN * (hi - lo)
    fa, fb = objective(a), objective(b)
    for _ in range(14):
        if fa < fb:
            hi, b, fb = b, a, fa
            a = hi - _GOLDEN * (hi - lo)
            fa = objective(a)
        else:
            lo, a, fa = a, b, fb
            b = lo + _GOLDEN * (hi - lo)
            fb = objective(b)
    return math.exp(a if fa < fb else b)


def _finite_exp_half(log_value: float) -> float | None:
    if math.isnan(log_value) or log_value == math.inf or 0.5 * log_value > LOG_FLOAT_MAX:
        return None
    return math.exp(0.5 * log_value) if log_value > -math.inf else 0.0


def assemble_bound(ineq: EnergyInequality, grid: TimeGrid) -> BoundResult:
    """Apply Gronwall with the best Young weight to the energy inequality on the time grid.

    Every Young weight ``lambda > 0`` gives a valid bound at every time, so the bound reported
    at each output time is the minimum over the weights tried there (a finite search is only
    about tightness, never about validity).
    """
    length = grid.t_end - grid.t0
    cache: dict[float, Propagation] = {}
    if ineq.residual is None:
        lambdas = [1.0]
    elif not np.any(ineq.residual > 0):
        lambdas = [1e-12 / length]
    else:
        lambdas = list(_GRID / length)
        if ineq.young_cap is not None:
            cap = float(ineq.young_cap)
            lambdas = [lam for lam in lambdas if lam < cap] + [cap]
    for lam in lambdas:
        cache[lam] = _run(ineq, grid, lam)

    def best_by(key: str) -> float:
        def score(lam: float) -> float:
            prop = cache[lam]
            v = prop.log_y[-1] if key == "final" else prop.log_space_time
            return float(v) if not math.isnan(v) else math.inf

        return min(cache, key=score)

    lam_final, lam_st = best_by("final"), best_by("space_time")
    if len(lambdas) > 1:
        if math.isfinite(cache[lam_final].log_y[-1]):
            lam_final = _refine(ineq, grid, lam_final, "final", cache)
        if math.isfinite(cache[lam_st].log_space_time):
            lam_st = _refine(ineq, grid, lam_st, "space_time", cache)
    final_prop, st_prop = cache[lam_final], cache[lam_st]
    times = final_prop.times
    # everything below works with the log of the *squared* bound; in the norm mode
    # (``squared = False``) Y is the norm itself, so its log is doubled first
    factor = 1.0 if ineq.squared else 2.0
    stacked = factor * np.stack([p.log_y for p in cache.values()])
    with np.errstate(invalid="ignore"):
        profile_log = np.where(
            np.all(np.isnan(stacked), axis=0),
            np.nan,
            np.nanmin(np.where(np.isnan(stacked), np.inf, stacked), axis=0),
        )
    profile_log = np.where(np.isinf(profile_log) & (profile_log > 0), np.nan, profile_log)
    ended = np.flatnonzero(np.isnan(profile_log))
    vacuous_from: float | None = None
    ended_by: str | None = None
    if ended.size:
        # every weight ended: the bound ends where the last of them ended
        latest = max(cache.values(), key=lambda p: p.ended_at if p.ended_at is not None else -1)
        vacuous_from = latest.ended_at if latest.ended_at is not None else float(times[ended[0]])
        ended_by = latest.ended_by

    log_final = factor * float(final_prop.log_y[-1])
    log_st = float(st_prop.log_space_time) if ineq.squared else _log_norm_space_time(st_prop, grid)
    l2_final = _finite_exp_half(log_final)
    l2_st = _finite_exp_half(log_st)
    log10 = math.log(10)
    terms = _terms(ineq, final_prop, st_prop, log_final, log_st, grid)
    rigor = weakest(ineq.rate_rigor, *[cast(Rigor, t["rigor"]) for t in terms])
    warnings: list[str] = []
    status = "valid"
    if vacuous_from is not None or l2_final is None or l2_st is None:
        status = "vacuous"
        reason = {
            "rate-pole": "the growth rate diverges (a regularity bound has a pole)",
            "overflow": "the bound exceeds the float64 range",
            "rate-too-stiff": "the growth rate could not be integrated reliably",
        }.get(ended_by or "overflow", "the bound is not finite")
        last = float(times[ended[0] - 1]) if ended.size and ended[0] > 0 else grid.t0
        warnings.append(
            f"vacuous: {reason}; the bound is finite up to t = {last:.6g}"
            + (f" and not beyond t = {vacuous_from:.6g}" if vacuous_from else "")
        )
    profile = [_finite_exp_half(float(v)) for v in profile_log]
    log10_st = (0.5 * log_st / log10) if math.isfinite(log_st) else None
    log10_final = (0.5 * log_final / log10) if math.isfinite(log_final) else None
    if ineq.norm_addition is not None:
        add = ineq.norm_addition
        # triangle inequality ||e|| <= sqrt(Y) + ||b|| at each time; Minkowski in space-time
        profile = [
            None if p is None else p + float(b) for p, b in zip(profile, add.profile, strict=True)
        ]
        if l2_final is not None:
            l2_final += float(add.profile[-1])
            log10_final = math.log10(l2_final) if l2_final > 0 else None
        if l2_st is not None:
            l2_st += add.space_time
            log10_st = math.log10(l2_st) if l2_st > 0 else None
        terms.append(_addition_term(add))
        rigor = weakest(rigor, add.info.rigor)
    return BoundResult(
        status=status,
        l2_space_time=l2_st,
        l2_final_time=l2_final,
        log10_l2_space_time=log10_st,
        log10_l2_final_time=log10_final,
        profile_t=[float(t) for t in times],
        profile_bound=profile,
        vacuous_from=vacuous_from,
        ended_by=ended_by,
        terms=terms,
        young_weight={
            "final_time": lam_final if ineq.residual is not None else None,
            "space_time": lam_st if ineq.residual is not None else None,
        },
        warnings=warnings,
        rigor=rigor,
    )


def assemble_best(
    ineq: EnergyInequality, grid: TimeGrid
) -> tuple[EnergyInequality, BoundResult, list[str]]:
    """Assemble ``ineq`` and each of its ``alternatives``; keep the smallest space-time bound.

    Every alternative is a valid inequality for the same error, so the smaller bound is as
    valid as either (the choice is about tightness only). Returns the chosen inequality, its
    result and a warning naming the values of the others.
    """
    best, result = ineq, assemble_bound(ineq, grid)
    if not ineq.alternatives:
        return best, result, []
    seen = [(ineq, result)]
    for alt in ineq.alternatives:
        alt_result = assemble_bound(alt, grid)
        seen.append((alt, alt_result))
        if _key(alt_result) < _key(result):
            best, result = alt, alt_result
    values = "; ".join(
        f"{i.label or 'default estimate'}: l2_space_time {_fmt(r.l2_space_time)}, "
        f"l2_final_time {_fmt(r.l2_final_time)}"
        for i, r in seen
    )
    note = (
        f"{len(seen)} valid estimates were assembled and the smallest space-time bound is "
        f"reported ({best.label or 'default estimate'}): {values}"
    )
    return best, result, [note]


def _key(result: BoundResult) -> tuple[float, float]:
    st, ft = result.l2_space_time, result.l2_final_time
    return (math.inf if st is None else st, math.inf if ft is None else ft)


def _fmt(value: float | None) -> str:
    return "not finite" if value is None else f"{value:.6g}"


def _addition_term(add: NormAddition) -> dict[str, object]:
    info = add.info
    return {
        "name": info.name,
        "symbol": info.symbol,
        "value": float(add.profile[-1]),
        "formula": info.formula,
        "rigor": info.rigor,
        "share_final_time": None,
        "share_space_time": None,
        "detail": (info.detail + "; " if info.detail else "")
        + "value = the norm added to the final-time bound (triangle inequality, not a share "
        f"of the squared bound); space-time norm {add.space_time:.6g}",
    }


def _log_norm_space_time(prop: Propagation, grid: TimeGrid) -> float:
    """Norm mode: log of ``int Y^2 dt``, by the plan's Gauss-Legendre time weights applied to
    the square of the norm bound ``Y`` at the time nodes."""
    if prop.ended_by is not None:
        return math.inf
    with np.errstate(divide="ignore"):
        terms = np.log(grid.weights) + 2.0 * prop.log_y[np.flatnonzero(prop.node_mask)]
    finite = terms[np.isfinite(terms)]
    if finite.size == 0:
        return -math.inf
    top = float(np.max(finite))
    return top + math.log(float(np.sum(np.exp(finite - top))))


def _norm_space_time_shares(prop: Propagation, grid: TimeGrid) -> dict[str, float]:
    """Norm mode: each source's share of ``int Y^2`` (attributed as ``Y^2 * share``)."""
    node = np.flatnonzero(prop.node_mask)
    log_sq = 2.0 * prop.log_y[node]
    if prop.ended_by is not None or not np.any(np.isfinite(log_sq)):
        return {}
    with np.errstate(divide="ignore", invalid="ignore"):
        weights = grid.weights * np.exp(log_sq - np.max(log_sq[np.isfinite(log_sq)]))
    weights = np.where(np.isfinite(weights), weights, 0.0)
    total = float(np.sum(weights))
    if total <= 0:
        return {}
    return {k: float(np.sum(weights * v[node]) / total) for k, v in prop.shares.items()}


def _terms(
    ineq: EnergyInequality,
    final: Propagation,
    st: Propagation,
    log_final: float,
    log_st: float,
    grid: TimeGrid,
) -> list[dict[str, object]]:
    infos: list[tuple[str, SourceInfo]] = [("initial", ineq.initial_info)]
    if ineq.residual is not None and ineq.residual_info is not None:
        infos.append(("interior", ineq.residual_info))
    infos.extend(ineq.forcing_info.items())
    out: list[dict[str, object]] = []
    # log of the final-time bound in the units the shares refer to (squared, or the norm)
    log_units = log_final if ineq.squared else 0.5 * log_final
    st_shares = st.space_time_shares if ineq.squared else _norm_space_time_shares(st, grid)
    what = "squared final-time bound" if ineq.squared else "final-time bound (norm)"
    for key, info in infos:
        share_f = float(final.shares[key][-1]) if key in final.shares else math.nan
        share_s = st_shares.get(key, math.nan)
        value: float | None = None
        if math.isfinite(log_units) and math.isfinite(share_f) and log_units < LOG_FLOAT_MAX:
            value = share_f * math.exp(log_units)
        elif log_final == -math.inf:
            value = 0.0
        out.append(
            {
                "name": info.name,
                "symbol": info.symbol,
                "value": value,
                "formula": info.formula,
                "rigor": info.rigor,
                "share_final_time": share_f if math.isfinite(share_f) else None,
                "share_space_time": share_s if math.isfinite(share_s) else None,
                "detail": (info.detail + f"; value = contribution to the {what}")
                if info.detail
                else f"value = contribution to the {what}",
            }
        )
    del log_st
    return out
