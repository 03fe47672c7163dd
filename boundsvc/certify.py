"""Orchestration of one certificate: classify, plan, integrate, assemble, record.

Each step is a function of plain inputs; the HTTP layer only validates, calls these, and maps
errors. Derivations are cached by the problem's content hash (symbolic work is the slow part).
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import math
import threading
from collections import OrderedDict
from collections.abc import Mapping
from dataclasses import dataclass
from importlib import metadata
from typing import Any, cast

from api_schemas import ModelInfo, PlanRequest, ProblemSpec
from boundsvc import __version__
from boundsvc.assembly import assemble_bound
from boundsvc.errors import PlanInvalid, RegularityError
from boundsvc.families import CertifyInputs, Classified, classify, problem_sha256
from boundsvc.quadrature import Plan, PlanError, build_gauss_plan, plan_id_for
from boundsvc.regularity import RegularityValue, check_keys, parse_regularity
from boundsvc.residuals import validate_residuals

CAUTION = (
    "This bound holds only under the hypotheses stated in the certificate (the regularity "
    "values asserted for the exact solution, the boundary and initial data, and the rigor of "
    "each ingredient). Safety-relevant use needs independent verification and the "
    "organisation's own verification and validation practice."
)


class _LRU:
    def __init__(self, size: int) -> None:
        self._data: OrderedDict[str, Any] = OrderedDict()
        self._size = size
        self._lock = threading.Lock()

    def get(self, key: str) -> Any | None:
        with self._lock:
            if key in self._data:
                self._data.move_to_end(key)
                return self._data[key]
        return None

    def put(self, key: str, value: Any) -> None:
        with self._lock:
            self._data[key] = value
            self._data.move_to_end(key)
            while len(self._data) > self._size:
                self._data.popitem(last=False)


_DERIVATIONS = _LRU(256)
_PLANS = _LRU(64)


def derive(problem: ProblemSpec) -> Classified:
    """Classify a problem and derive its constants (cached by content hash)."""
    key = problem_sha256(problem)
    cached = _DERIVATIONS.get(key)
    if cached is not None:
        return cast(Classified, cached)
    classified = classify(problem)
    _DERIVATIONS.put(key, classified)
    return classified


def problem_summary(
    classified: Classified, problem_id: str, regularity: Mapping[str, float | str] | None = None
) -> dict[str, Any]:
    """Body of POST /v1/problems."""
    fam = classified.family
    constants = [c.as_json() for c in classified.constants()]
    warnings: list[str] = []
    if regularity:
        values = parse_all_regularity(classified, regularity)
        warnings.append(
            "constants are shown symbolically; their values depend on the residuals "
            f"too and are computed per certificate (regularity keys checked: "
            f"{', '.join(values) or 'none'})"
        )
    reqs = classified.requirements()
    return {
        "problem_id": problem_id,
        "family": fam.id,
        "theorem": fam.title,
        "classification": classified.description(),
        "required_regularity": [r.any_of[0] for r in reqs],
        "optional_regularity": [
            k for k in classified.allowed_keys() if k not in {r.any_of[0] for r in reqs}
        ],
        "regularity_requirements": [
            {
                "key": r.any_of[0],
                "any_of": list(r.any_of),
                "purpose": r.purpose,
                "quantity": r.quantity,
            }
            for r in reqs
        ],
        "components": classified.components(),
        "bounded_quantities": list(fam.bounded_quantities),
        "hypotheses": classified.hypotheses(),
        "constants": constants,
        "warnings": warnings,
        "reference": fam.reference,
    }


def parse_all_regularity(
    classified: Classified, regularity: Mapping[str, float | str]
) -> dict[str, RegularityValue]:
    """Check the keys against the theorem and parse every value."""
    check_keys(regularity, classified.allowed_keys(), [r.any_of for r in classified.requirements()])
    spec = classified.problem.spec
    return {
        key: parse_regularity(key, value, spec.time, spec.parameters)
        for key, value in regularity.items()
    }


def plan_spec(request: PlanRequest, problem_id: str) -> dict[str, Any]:
    """The canonical request a plan is rebuilt from (its id is the hash of this)."""
    return {
        "problem_id": problem_id,
        "rule": request.rule,
        "points": dict(sorted(request.points.items())),
        "panels": dict(sorted(request.panels.items())),
    }


def build_plan(classified: Classified, spec: Mapping[str, Any]) -> Plan:
    """Rebuild (or fetch from the cache) the plan of a canonical plan spec."""
    plan_id = plan_id_for(spec)
    cached = _PLANS.get(plan_id)
    if cached is not None:
        return cast(Plan, cached)
    if classified.problem.domain.time is None:
        raise PlanInvalid(
            "plan_invalid", "steady problems are not supported by this rule yet", "problem.time"
        )
    try:
        plan = build_gauss_plan(
            classified.problem.domain,
            classified.components(),
            spec.get("points", {}),
            spec.get("panels", {}),
            spec,
        )
    except PlanError as exc:
        raise PlanInvalid("plan_invalid", str(exc), exc.field) from exc
    _PLANS.put(plan_id, plan)
    return plan


def plan_body(plan: Plan, problem_id: str) -> dict[str, Any]:
    """Body of POST /v1/plans."""
    return {
        "plan_id": plan.plan_id,
        "rule": plan.rule,
        "problem_id": problem_id,
        "components": [
            {
                "name": c.name,
                "axes": list(c.axes),
                "points": c.points.tolist(),
                "weights": c.weights.tolist(),
                "size": c.size,
            }
            for c in plan.components.values()
        ],
        "axis_nodes": {k: v.tolist() for k, v in plan.axis_nodes.items()},
        "time_nodes": plan.time.nodes.tolist() if plan.time is not None else [],
        "warnings": [],
    }


def _libraries() -> dict[str, str]:
    out = {}
    for name in ("numpy", "scipy", "sympy", "mpmath", "pydantic"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:  # pragma: no cover
            out[name] = "unknown"
    return out


def _canonical(obj: Any) -> bytes:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), allow_nan=False).encode()


@dataclass(frozen=True)
class CertificateDocument:
    """The stored certificate: its id, JSON document and canonical bytes."""

    id: str
    document: dict[str, Any]
    body: bytes


def certify(
    classified: Classified,
    problem_id: str,
    plan: Plan,
    regularity: Mapping[str, float | str],
    residuals: Mapping[str, object],
    model: ModelInfo | None,
    *,
    now: dt.datetime | None = None,
) -> CertificateDocument:
    """Compute a certificate. Raises core errors (RegularityError, ResidualError, ...)."""
    values = parse_all_regularity(classified, regularity)
    n_eq = len(classified.problem.unknowns)
    arrays, digests = validate_residuals(plan, residuals, classified.components(), n_eq)
    inequality = classified.energy_inequality(
        CertifyInputs(plan=plan, residuals=arrays, regularity=values)
    )
    if plan.time is None:  # pragma: no cover - steady rules come with the elliptic family
        raise RegularityError("problem_invalid", "steady problems are not supported yet", None)
    result = assemble_bound(inequality, plan.time)
    status = result.status
    warnings = list(inequality.warnings) + list(result.warnings)
    if inequality.failed_hypotheses:
        status = "invalid-hypotheses"
        warnings = [
            f"hypothesis contradicted: {m}" for m in inequality.failed_hypotheses
        ] + warnings
    warnings.append(
        "residual integrals use the plan's quadrature with no error term: their "
        "rigor is heuristic (use fresh, non-training points)"
    )
    fam = classified.family
    spec = classified.problem.spec
    model_json = model.model_dump(mode="json") if model is not None else None
    inputs_digest = hashlib.sha256(
        _canonical(
            {
                "problem": problem_id,
                "plan": plan.plan_id,
                "regularity": {k: regularity[k] for k in sorted(regularity)},
                "arrays": digests,
                "model": model_json,
                "service": __version__,
            }
        )
    ).hexdigest()
    cert_id = "crt_" + inputs_digest[:32]
    created = (now or dt.datetime.now(dt.UTC)).isoformat(timespec="milliseconds")
    constants = [c.as_json() for c in inequality.constants]
    document: dict[str, Any] = {
        "id": cert_id,
        "status": status,
        "family": fam.id,
        "problem_id": problem_id,
        "bound": {
            "l2_space_time": result.l2_space_time,
            "l2_final_time": result.l2_final_time,
            "log10_l2_space_time": result.log10_l2_space_time,
            "log10_l2_final_time": result.log10_l2_final_time,
        },
        "time_profile": {"t": result.profile_t, "l2_error_bound": result.profile_bound},
        "terms": result.terms,
        "constants": constants,
        "young_weight": result.young_weight,
        "warnings": warnings,
        "hypotheses": classified.hypotheses(),
        "rigor": result.rigor,
        "vacuous_from": result.vacuous_from,
        "model": model_json,
        "regularity": {k: regularity[k] for k in sorted(regularity)},
        "problem": spec.model_dump(mode="json"),
        "caution": CAUTION,
        "provenance": {
            "service_version": __version__,
            "libraries": _libraries(),
            "problem_sha256": classified.problem.sha256,
            "inputs_sha256": inputs_digest,
            "plan_id": plan.plan_id,
            "theorem": f"{fam.id}: {fam.title}. {fam.reference}",
            "theory_document": fam.theory_document,
            "created_at": created,
            "arrays_sha256": digests,
        },
    }
    _scrub(document)
    return CertificateDocument(id=cert_id, document=document, body=_canonical(document))


def _scrub(obj: Any) -> Any:
    """Replace non-finite floats by None in place (JSON has no inf or nan)."""
    if isinstance(obj, dict):
        for k, v in obj.items():
            obj[k] = _scrub(v)
        return obj
    if isinstance(obj, list):
        for i, v in enumerate(obj):
            obj[i] = _scrub(v)
        return obj
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj
