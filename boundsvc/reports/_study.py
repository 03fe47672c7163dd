"""Studies: how well the bounds of several certificates track measured errors.

Everything here works on plain numbers (no HTTP, no store): :func:`study_statistics` takes the
rows of a study and returns the effectivity statistics, the correlations with their confidence
intervals and, for a swept parameter, the trend of the bound along it.

Notes
-----
*Effectivity* is ``bound / measured error`` (>= 1 whenever the bound holds). Correlations are
computed between ``log10(bound)`` and ``log10(measured error)``: bounds and errors span decades,
and on log values a constant effectivity is a perfect linear relation. Pearson's ``r`` and its
interval come from :func:`scipy.stats.pearsonr` (``confidence_interval()``: Fisher's z-transform,
SE ``1/sqrt(n-3)``). Spearman's ``rho`` (:func:`scipy.stats.spearmanr`, rank based, so the log
changes nothing) gets a Fisher-z interval with the variance ``1.06/(n-3)`` of Fieller, Hartley &
Pearson [1]_, i.e. SE ``sqrt(1.06/(n-3))``. Both intervals are asymptotic approximations: with a
handful of certificates they are indications, not guarantees.

References
----------
.. [1] E. C. Fieller, H. O. Hartley, E. S. Pearson, "Tests for rank correlation coefficients. I",
   Biometrika 44 (1957) 470-481.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

#: Variance factor of Fisher's z of Spearman's rho (Fieller, Hartley & Pearson 1957).
SPEARMAN_Z_VARIANCE = 1.06
#: Fewest points for which a correlation coefficient is reported (and its interval).
MIN_CORRELATION_POINTS = 3
MIN_INTERVAL_POINTS = 4


@dataclass(frozen=True)
class StudyRow:
    """One certificate of a study: its bound and, when known, error and parameter value."""

    certificate_id: str
    bound: float | None
    measured_error: float | None = None
    parameter: float | None = None


def _finite_positive(value: float | None) -> bool:
    return value is not None and math.isfinite(value) and value > 0


def effectivity_summary(values: Sequence[float]) -> dict[str, Any] | None:
    """Median, min, max and interquartile range of effectivities (None if there are none)."""
    if not values:
        return None
    arr = np.asarray(values, dtype=np.float64)
    q1, median, q3 = (float(q) for q in np.percentile(arr, [25.0, 50.0, 75.0]))
    return {
        "n": int(arr.size),
        "median": median,
        "min": float(arr.min()),
        "max": float(arr.max()),
        "q1": q1,
        "q3": q3,
        "iqr": q3 - q1,
        "all_at_least_one": bool(np.all(arr >= 1.0)),
    }


def _degenerate(r: float) -> bool:
    return abs(r) >= 1.0 - 1e-12


def pearson_log(
    bounds: Sequence[float], errors: Sequence[float], confidence: float
) -> dict[str, Any]:
    """Pearson's r of log10 values, its p-value and scipy's Fisher-z confidence interval."""
    x, y = np.log10(np.asarray(bounds)), np.log10(np.asarray(errors))
    out: dict[str, Any] = {
        "method": "pearson",
        "on": "log10 values",
        "n": int(x.size),
        "r": None,
        "p_value": None,
        "ci": None,
        "ci_method": "Fisher z-transform, SE 1/sqrt(n-3) "
        "(scipy.stats.pearsonr(...).confidence_interval())",
    }
    reason = _unusable(x, y)
    if reason:
        out["reason"] = reason
        return out
    res = stats.pearsonr(x, y)
    r = float(res.statistic)
    out.update(r=r, p_value=float(res.pvalue))
    if x.size >= MIN_INTERVAL_POINTS:
        if _degenerate(r):
            out["ci"] = [r, r]
        else:
            ci = res.confidence_interval(confidence_level=confidence)
            out["ci"] = [float(ci.low), float(ci.high)]
    return out


def spearman_fisher_ci(rho: float, n: int, confidence: float) -> tuple[float, float]:
    """Fisher-z interval of Spearman's rho, SE sqrt(1.06/(n-3)) (Fieller et al. 1957)."""
    if n < MIN_INTERVAL_POINTS:
        raise ValueError(f"n must be >= {MIN_INTERVAL_POINTS} for an interval, got {n}")
    if _degenerate(rho):
        return (rho, rho)
    z = math.atanh(rho)
    half = stats.norm.ppf(0.5 + confidence / 2.0) * math.sqrt(SPEARMAN_Z_VARIANCE / (n - 3))
    return (math.tanh(z - half), math.tanh(z + half))


def spearman(
    xs: Sequence[float],
    ys: Sequence[float],
    confidence: float,
    *,
    on: str = "ranks (log10 changes nothing)",
) -> dict[str, Any]:
    """Spearman's rho, its p-value and the Fisher-z interval of :func:`spearman_fisher_ci`."""
    x, y = np.asarray(xs, dtype=np.float64), np.asarray(ys, dtype=np.float64)
    out: dict[str, Any] = {
        "method": "spearman",
        "on": on,
        "n": int(x.size),
        "rho": None,
        "p_value": None,
        "ci": None,
        "ci_method": "Fisher z-transform, SE sqrt(1.06/(n-3)) (Fieller, Hartley & Pearson 1957)",
    }
    reason = _unusable(x, y)
    if reason:
        out["reason"] = reason
        return out
    res = stats.spearmanr(x, y)
    rho = float(res.statistic)
    out.update(rho=rho, p_value=float(res.pvalue))
    if x.size >= MIN_INTERVAL_POINTS:
        out["ci"] = list(spearman_fisher_ci(rho, int(x.size), confidence))
    return out


def _unusable(x: np.ndarray, y: np.ndarray) -> str | None:
    if x.size < MIN_CORRELATION_POINTS:
        return f"needs at least {MIN_CORRELATION_POINTS} certificates with both values"
    if np.ptp(x) == 0 or np.ptp(y) == 0:
        return "one of the variables is constant"
    return None


def monotone_trend(params: Sequence[float], values: Sequence[float]) -> str:
    """``increasing``, ``decreasing`` or ``not monotone`` (strict, after sorting by param)."""
    order = np.argsort(np.asarray(params), kind="stable")
    v = np.asarray(values, dtype=np.float64)[order]
    diffs = np.diff(v)
    if diffs.size and np.all(diffs > 0):
        return "increasing"
    if diffs.size and np.all(diffs < 0):
        return "decreasing"
    return "not monotone"


def study_statistics(
    rows: Sequence[StudyRow], *, confidence: float = 0.95, parameter_name: str | None = None
) -> dict[str, Any]:
    """Effectivity, bound-error correlations and the parameter trend of a study's rows."""
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be in (0, 1), got {confidence}")
    paired = [r for r in rows if _finite_positive(r.bound) and _finite_positive(r.measured_error)]
    bounds = [float(r.bound) for r in paired if r.bound is not None]
    errors = [float(r.measured_error) for r in paired if r.measured_error is not None]
    out: dict[str, Any] = {
        "confidence_level": confidence,
        "paired": len(paired),
        "effectivity": effectivity_summary([b / e for b, e in zip(bounds, errors, strict=True)]),
        "correlation": None,
        "parameter_trend": None,
    }
    if paired:
        out["correlation"] = {
            "variables": "log10(bound) vs log10(measured error)",
            "pearson": pearson_log(bounds, errors, confidence),
            "spearman": spearman(np.log10(bounds).tolist(), np.log10(errors).tolist(), confidence),
        }
    if parameter_name is not None:
        swept = [r for r in rows if r.parameter is not None and _finite_positive(r.bound)]
        p = [float(r.parameter) for r in swept if r.parameter is not None]
        b = [float(r.bound) for r in swept if r.bound is not None]
        trend: dict[str, Any] = {
            "name": parameter_name,
            "n": len(swept),
            "bound": monotone_trend(p, b) if len(swept) >= 2 else "not enough points",
            "spearman_bound": spearman(p, b, confidence, on="ranks"),
        }
        measured = [r for r in swept if _finite_positive(r.measured_error)]
        if measured:
            pm = [float(r.parameter) for r in measured if r.parameter is not None]
            em = [float(r.measured_error) for r in measured if r.measured_error is not None]
            trend["measured_error"] = (
                monotone_trend(pm, em) if len(measured) >= 2 else "not enough points"
            )
            trend["spearman_measured_error"] = spearman(pm, em, confidence, on="ranks")
        out["parameter_trend"] = trend
    return out


BOUND_QUANTITIES = ("l2_space_time", "l2_final_time")


def _bound_of(doc: Mapping[str, Any], quantity: str) -> float | None:
    value = (doc.get("bound") or {}).get(quantity)
    return float(value) if isinstance(value, int | float) and math.isfinite(value) else None


def assemble_study(
    *,
    study_id: str,
    title: str | None,
    documents: Sequence[Mapping[str, Any]],
    measured_errors: Mapping[str, float] | None,
    parameter_name: str | None,
    parameter_values: Mapping[str, float] | None,
    bound_quantity: str = "l2_space_time",
    confidence: float = 0.95,
    created_at: str,
) -> dict[str, Any]:
    """The stored study document: one item per certificate, then the statistics.

    Certificates without a finite bound (vacuous) stay in ``items`` with a note and are left
    out of every statistic.
    """
    if bound_quantity not in BOUND_QUANTITIES:
        raise ValueError(f"bound_quantity must be one of {BOUND_QUANTITIES}, got {bound_quantity}")
    measured = dict(measured_errors or {})
    values = dict(parameter_values or {})
    items: list[dict[str, Any]] = []
    rows: list[StudyRow] = []
    for doc in documents:
        cid = str(doc.get("id"))
        bound = _bound_of(doc, bound_quantity)
        error = measured.get(cid)
        note = None
        if bound is None:
            note = f"no finite {bound_quantity} bound (status {doc.get('status')}): not counted"
        items.append(
            {
                "certificate_id": cid,
                "status": doc.get("status"),
                "family": doc.get("family"),
                "model": doc.get("model"),
                "bound": bound,
                "measured_error": error,
                "effectivity": (bound / error if bound is not None and error else None),
                "parameter": values.get(cid),
                "note": note,
            }
        )
        rows.append(StudyRow(cid, bound, error, values.get(cid)))
    statistics = study_statistics(rows, confidence=confidence, parameter_name=parameter_name)
    notes = [
        "effectivity = bound / measured error; a value below 1 means the measured error exceeds "
        "the bound (check the hypotheses and how the error was measured)",
        "Pearson's r is computed on log10(bound) and log10(measured error); Spearman's rho on "
        "ranks (taking logs does not change it)",
        "confidence intervals: Pearson from scipy.stats.pearsonr(...).confidence_interval() "
        "(Fisher z, SE 1/sqrt(n-3)); Spearman by Fisher z with SE sqrt(1.06/(n-3)) "
        "(Fieller, Hartley & Pearson 1957); both asymptotic, indicative for small n",
    ]
    families = sorted({str(d.get("family")) for d in documents})
    if len(families) > 1:
        notes.append(f"the certificates come from several families ({', '.join(families)})")
    return {
        "id": study_id,
        "title": title,
        "created_at": created_at,
        "bound_quantity": bound_quantity,
        "certificate_ids": [str(d.get("id")) for d in documents],
        "swept_parameter": None if parameter_name is None else {"name": parameter_name},
        "items": items,
        **statistics,
        "notes": notes,
    }
