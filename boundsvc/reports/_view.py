"""Certificate and study documents turned into what the templates show (no HTML here)."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from boundsvc.reports._mathtext import latex_data_uri

RIGOR_ORDER = ("proven", "assumed", "statistical", "heuristic")
RIGOR_MEANING: dict[str, str] = {
    "proven": "follows from the theorem and exact arithmetic",
    "assumed": "rests on a regularity value the client asserted",
    "statistical": "a quadrature error estimate that holds with a stated confidence",
    "heuristic": "an estimate with no guarantee",
}
DEFAULT_CAUTION = (
    "A bound holds only under its stated hypotheses (the regularity values "
    "asserted for the exact solution, the boundary and initial data, and the rigor "
    "of each ingredient); it is not a guarantee beyond them."
)


def fmt_number(value: Any, digits: int = 4) -> str:
    """``4.2e-03``-style text for numbers; ``n/a`` for None and non-finite values."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return "n/a" if value is None else str(value)
    if not math.isfinite(value):
        return "n/a"
    if value == 0:
        return "0"
    return f"{value:.{digits}g}"


def fmt_percent(share: Any) -> str:
    if not isinstance(share, int | float) or not math.isfinite(share):
        return "n/a"
    return f"{100.0 * share:.1f}%"


def model_label(model: Mapping[str, Any] | None) -> str:
    if not model or not (model.get("name") or model.get("version")):
        return "no model metadata"
    text = str(model.get("name") or "?")
    if model.get("version"):
        text += f" {model['version']}"
    if model.get("epoch") is not None:
        text += f" (epoch {model['epoch']})"
    return text


def _domain(problem: Mapping[str, Any]) -> str:
    parts = [
        f"{axis} ∈ [{fmt_number(lo)}, {fmt_number(hi)}]"
        for axis, (lo, hi) in (problem.get("space") or {}).items()
    ]
    time = problem.get("time")
    if isinstance(time, list) and len(time) == 2:
        parts.append(f"t ∈ [{fmt_number(time[0])}, {fmt_number(time[1])}]")
    return ", ".join(parts) or "n/a"


def _ingredients(doc: Mapping[str, Any]) -> list[dict[str, str]]:
    rows = [
        {
            "kind": "term",
            "name": str(t.get("name", "?")),
            "rigor": str(t.get("rigor", "?")),
            "why": str(t.get("detail") or ""),
        }
        for t in doc.get("terms") or []
    ]
    rows += [
        {
            "kind": "constant",
            "name": f"{c.get('symbol', '?')}: {c.get('name', '')}",
            "rigor": str(c.get("rigor") or "not stated"),
            "why": "",
        }
        for c in doc.get("constants") or []
    ]
    for key, value in (doc.get("regularity") or {}).items():
        rows.append(
            {
                "kind": "regularity",
                "name": f"{key} = {value}",
                "rigor": "assumed",
                "why": "asserted by the client",
            }
        )
    return rows


def certificate_view(doc: Mapping[str, Any]) -> dict[str, Any]:
    """Everything the report template shows, formatted."""
    bound = doc.get("bound") or {}
    problem = doc.get("problem") or {}
    provenance = doc.get("provenance") or {}
    constants = []
    for c in doc.get("constants") or []:
        constants.append(
            {
                "name": c.get("name", ""),
                "symbol": c.get("symbol", ""),
                "expression": c.get("expression", ""),
                "latex": c.get("latex"),
                "latex_img": latex_data_uri(c.get("latex")),
                "value": fmt_number(c.get("value")),
                "rigor": c.get("rigor") or "not stated",
                "derivation": list(c.get("derivation") or []),
                "reference": c.get("reference"),
            }
        )
    terms = [
        {
            "name": t.get("name", ""),
            "symbol": t.get("symbol", ""),
            "formula": t.get("formula", ""),
            "value": fmt_number(t.get("value")),
            "share": fmt_percent(t.get("share_final_time")),
            "share_space_time": fmt_percent(t.get("share_space_time")),
            "rigor": t.get("rigor", "?"),
            "detail": t.get("detail") or "",
        }
        for t in doc.get("terms") or []
    ]
    profile = doc.get("time_profile") or {}
    bounds = [
        ("L2 over space-time", bound.get("l2_space_time"), bound.get("log10_l2_space_time")),
        ("L2 at the final time", bound.get("l2_final_time"), bound.get("log10_l2_final_time")),
    ]
    if bound.get("l2_space") is not None:
        bounds.append(("L2 over space (steady)", bound.get("l2_space"), None))
    return {
        "id": doc.get("id", "?"),
        "status": doc.get("status", "?"),
        "family": doc.get("family", "?"),
        "rigor": doc.get("rigor") or "not stated",
        "rigor_meaning": RIGOR_MEANING.get(str(doc.get("rigor")), ""),
        "bounds": [
            {
                "label": label,
                "value": fmt_number(value),
                "log10": None if log10 is None else f"{log10:.3f}",
            }
            for label, value, log10 in bounds
        ],
        "headline": fmt_number(bound.get("l2_space_time")),
        "vacuous_from": None
        if doc.get("vacuous_from") is None
        else fmt_number(doc.get("vacuous_from")),
        "profile_points": len(profile.get("t") or []),
        "model": model_label(doc.get("model")),
        "model_name": (doc.get("model") or {}).get("name"),
        "problem": {
            "equation": problem.get("equation", "n/a"),
            "domain": _domain(problem),
            "parameters": ", ".join(
                f"{k} = {fmt_number(v)}" for k, v in (problem.get("parameters") or {}).items()
            ),
            "boundary": problem.get("boundary") or "n/a",
            "initial_value": problem.get("initial_value"),
            "boundary_value": problem.get("boundary_value"),
        },
        "regularity": [{"key": k, "value": v} for k, v in (doc.get("regularity") or {}).items()],
        "terms": terms,
        "constants": constants,
        "ingredients": _ingredients(doc),
        "rigor_meanings": RIGOR_MEANING,
        "hypotheses": list(doc.get("hypotheses") or []),
        "warnings": list(doc.get("warnings") or []),
        "caution": doc.get("caution") or DEFAULT_CAUTION,
        "provenance": {
            "rows": [
                (label, provenance.get(key))
                for label, key in (
                    ("created", "created_at"),
                    ("service version", "service_version"),
                    ("theorem", "theorem"),
                    ("theory document", "theory_document"),
                    ("plan", "plan_id"),
                    ("problem SHA-256", "problem_sha256"),
                    ("inputs SHA-256", "inputs_sha256"),
                )
                if provenance.get(key)
            ],
            "libraries": sorted((provenance.get("libraries") or {}).items()),
            "arrays": sorted((provenance.get("arrays_sha256") or {}).items()),
        },
        "created_at": provenance.get("created_at", ""),
    }


def study_view(study: Mapping[str, Any]) -> dict[str, Any]:
    """The study page's numbers, formatted."""
    eff = study.get("effectivity")
    corr = study.get("correlation") or {}

    def coefficient(block: Mapping[str, Any] | None, key: str) -> dict[str, Any] | None:
        if not block:
            return None
        ci = block.get("ci")
        return {
            "value": fmt_number(block.get(key), 3),
            "p": fmt_number(block.get("p_value"), 3),
            "ci": None if not ci else f"[{fmt_number(ci[0], 3)}, {fmt_number(ci[1], 3)}]",
            "ci_method": block.get("ci_method", ""),
            "on": block.get("on", ""),
            "n": block.get("n"),
            "reason": block.get("reason"),
        }

    trend = study.get("parameter_trend")
    return {
        "id": study.get("id"),
        "title": study.get("title") or "untitled study",
        "created_at": study.get("created_at", ""),
        "bound_quantity": study.get("bound_quantity", "l2_space_time"),
        "confidence": fmt_percent(study.get("confidence_level", 0.95)),
        "effectivity": None
        if not eff
        else {k: fmt_number(eff.get(k), 3) for k in ("median", "min", "max", "q1", "q3", "iqr")}
        | {"n": eff.get("n"), "all_at_least_one": eff.get("all_at_least_one")},
        "pearson": coefficient(corr.get("pearson"), "r"),
        "spearman": coefficient(corr.get("spearman"), "rho"),
        "trend": None
        if not trend
        else {
            "name": trend.get("name"),
            "bound": trend.get("bound"),
            "measured_error": trend.get("measured_error"),
            "spearman_bound": coefficient(trend.get("spearman_bound"), "rho"),
            "spearman_measured": coefficient(trend.get("spearman_measured_error"), "rho"),
        },
        "rows": [
            {
                "certificate_id": i.get("certificate_id"),
                "status": i.get("status"),
                "model": model_label(i.get("model")),
                "bound": fmt_number(i.get("bound")),
                "measured_error": fmt_number(i.get("measured_error")),
                "effectivity": fmt_number(i.get("effectivity"), 3),
                "parameter": fmt_number(i.get("parameter")),
                "note": i.get("note") or "",
            }
            for i in study.get("items") or []
        ],
        "has_measured": any(i.get("measured_error") is not None for i in study.get("items") or []),
        "parameter": (study.get("swept_parameter") or {}).get("name"),
        "notes": list(study.get("notes") or []),
    }
