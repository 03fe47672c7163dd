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

from api_schemas import ModelInfo, PlanRequest, ProblemSpec, QuadratureOptions
from boundsvc import __version__
from boundsvc.assembly import BoundResult, assemble_best, final_log_at, steady_result
from boundsvc.errors import PlanInvalid, ResidualError
from boundsvc.families import (
    CertifyInputs,
    Classified,
    EnergyInequality,
    classify,
    problem_sha256,
    weakest,
)
from boundsvc.families._base import Rigor
from boundsvc.fields import residuals_from_fields
from boundsvc.quadrature import (
    Plan,
    PlanError,
    QuadratureLog,
    build_custom_plan,
    build_gauss_plan,
    build_sampled_plan,
    plan_id_for,
    quadrature_log,
    simpson_rule,
    trapezoid_rule,
)
from boundsvc.regularity import RegularityValue, check_keys, parse_regularity
from boundsvc.residuals import validate_residuals

CAUTION = (
    "This bound holds only under the hypotheses stated in the certificate (the regularity "
    "values asserted for the exact solution, the boundary and initial data, and the rigor of "
    "each ingredient). Safety-relevant use needs independent verification and the "
    "organisation's own verification and validation practice."
)


class _LRU:
    """A small thread-safe LRU cache, bounded by entry count and by total weight."""

    def __init__(self, size: int, max_weight: float = float("inf")) -> None:
        self._data: OrderedDict[str, tuple[Any, float]] = OrderedDict()
        self._size = size
        self._max_weight = max_weight
        self._weight = 0.0
        self._lock = threading.Lock()

    def get(self, key: str) -> Any | None:
        with self._lock:
            if key in self._data:
                self._data.move_to_end(key)
                return self._data[key][0]
        return None

    def put(self, key: str, value: Any, weight: float = 1.0) -> None:
        with self._lock:
            if key in self._data:
                self._weight -= self._data.pop(key)[1]
            self._data[key] = (value, weight)
            self._weight += weight
            while len(self._data) > 1 and (
                len(self._data) > self._size or self._weight > self._max_weight
            ):
                _, (_, w) = self._data.popitem(last=False)
                self._weight -= w


_DERIVATIONS = _LRU(256)
_PLANS = _LRU(64, max_weight=4e7)  # weight: stored points (memory)


SYMBOLIC_BUDGET_SECONDS: float | None = None  # set by the service (settings); None: no sandbox


_INFLIGHT: dict[str, threading.Lock] = {}
_INFLIGHT_GUARD = threading.Lock()


def derive(problem: ProblemSpec, budget_seconds: float | None = None) -> Classified:
    """Classify a problem and derive its constants (cached by content hash).

    With a budget (the service always sets one), a cache miss is first tried in a worker
    process (``boundsvc.sandbox``): too much symbolic work is refused with
    ``problem_too_complex`` instead of blocking the service.
    """
    key = problem_sha256(problem)
    cached = _DERIVATIONS.get(key)
    if cached is not None:
        return cast(Classified, cached)
    # single flight: concurrent requests for the same new problem wait for one derivation
    # instead of each taking a symbolic worker (and finding them all busy)
    with _INFLIGHT_GUARD:
        lock = _INFLIGHT.setdefault(key, threading.Lock())
    try:
        with lock:
            cached = _DERIVATIONS.get(key)
            if cached is not None:
                return cast(Classified, cached)
            budget = budget_seconds if budget_seconds is not None else SYMBOLIC_BUDGET_SECONDS
            if budget is not None:
                from boundsvc.sandbox import sandbox

                sandbox().check(problem.model_dump(mode="json"), budget)
            classified = classify(problem)
            _DERIVATIONS.put(key, classified)
            return classified
    finally:
        with _INFLIGHT_GUARD:
            if _INFLIGHT.get(key) is lock and not lock.locked():
                del _INFLIGHT[key]


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
        "optional_components": classified.optional_components(),
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
    """The canonical request a plan is rebuilt from (its id is the hash of this).

    Random rules get a seed derived from the request when none is given, so that the same
    request always gives the same plan (and the seed is recorded in the plan).
    """
    spec: dict[str, Any] = {
        "problem_id": problem_id,
        "rule": request.rule,
        "points": dict(sorted(request.points.items())),
        "panels": dict(sorted(request.panels.items())),
    }
    if request.optional_components:  # absent when empty: earlier plans keep their ids
        spec["optional_components"] = sorted(set(request.optional_components))
    if request.rule in ("sobol", "monte-carlo"):
        spec["n"] = request.n
        spec["replicates"] = request.replicates if request.rule == "sobol" else 1
        if request.seed is None:
            digest = hashlib.sha256(_canonical(spec)).digest()
            spec["seed"] = int.from_bytes(digest[:8], "little") >> 1
        else:
            spec["seed"] = request.seed
    elif request.rule == "grid":
        spec["weights"] = request.weights
    elif request.rule == "custom":
        assert request.components is not None
        spec["components"] = {
            k: v.model_dump(mode="json") for k, v in sorted(request.components.items())
        }
    return spec


def build_plan(classified: Classified, spec: Mapping[str, Any]) -> Plan:
    """Rebuild (or fetch from the cache) the plan of a canonical plan spec."""
    plan_id = plan_id_for(spec)
    cached = _PLANS.get(plan_id)
    if cached is not None:
        return cast(Plan, cached)
    domain = classified.problem.domain
    names = classified.components()
    for name in spec.get("optional_components", []):
        if name not in classified.optional_components():
            raise PlanInvalid(
                "plan_invalid",
                f"{name!r} is not an optional component of this problem's theorem (it offers "
                f"{', '.join(classified.optional_components()) or 'none'})",
                "optional_components",
            )
        if name not in names:
            names = [*names, name]
    rule = spec.get("rule", "gauss-legendre")
    if domain.time is None and rule not in ("gauss-legendre", "grid"):
        raise PlanInvalid(
            "plan_invalid",
            f"the {rule} rule needs a time interval; steady "
            "problems use gauss-legendre or grid plans",
            "rule",
        )
    points, panels = spec.get("points", {}), spec.get("panels", {})
    try:
        if rule == "gauss-legendre":
            plan = build_gauss_plan(domain, names, points, panels, spec)
        elif rule in ("sobol", "monte-carlo"):
            plan = build_sampled_plan(
                domain,
                names,
                rule=rule,
                n=int(spec["n"]),
                replicates=int(spec["replicates"]),
                seed=int(spec["seed"]),
                points=points,
                panels=panels,
                spec=spec,
            )
        elif rule == "grid":
            simpson = spec.get("weights") == "simpson"
            defaults = dict.fromkeys(("t", *domain.space_axes), 33)  # odd: Simpson and nesting
            plan = build_gauss_plan(
                domain,
                names,
                {**defaults, **points},
                {},
                spec,
                axis_rule=simpson_rule if simpson else trapezoid_rule,
                rule_name="grid-simpson" if simpson else "grid-trapezoid",
            )
        elif rule == "custom":
            plan = build_custom_plan(domain, names, spec["components"], spec)
        else:  # pragma: no cover - the schema lists the rules
            raise PlanError(f"unknown rule {rule!r}", "rule")
    except PlanError as exc:
        raise PlanInvalid("plan_invalid", str(exc), exc.field) from exc
    except ValueError as exc:
        raise PlanInvalid("plan_invalid", str(exc), "points") from exc
    _PLANS.put(plan_id, plan, sum(c.size for c in plan.components.values()))
    return plan


def plan_body(plan: Plan, problem_id: str, *, with_arrays: bool = True) -> dict[str, Any]:
    """Body of POST /v1/plans (JSON rows; without the arrays for the binary formats)."""
    spec = plan.spec
    warnings: list[str] = []
    if plan.rule == "custom":
        warnings.append(
            "custom points: no quadrature error term; evaluating residuals at the "
            "training points biases the bound low"
        )
    components = []
    for c in plan.components.values():
        item: dict[str, Any] = {"name": c.name, "axes": list(c.axes), "size": c.size}
        if with_arrays:
            item["points"] = c.points.tolist()
            item["weights"] = c.weights.tolist()
        components.append(item)
    return {
        "plan_id": plan.plan_id,
        "rule": plan.rule,
        "problem_id": problem_id,
        "components": components,
        "axis_nodes": {k: v.tolist() for k, v in plan.axis_nodes.items()},
        "time_nodes": plan.time.nodes.tolist() if plan.time is not None else [],
        "warnings": warnings,
        "seed": spec.get("seed"),
        "replicates": spec.get("replicates"),
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
    quadrature: QuadratureOptions | None = None,
    project: str | None = None,
    now: dt.datetime | None = None,
    fields: Mapping[str, Mapping[str, object]] | None = None,
) -> CertificateDocument:
    """Compute a certificate. Raises core errors (RegularityError, ResidualError, ...).

    ``fields`` (fields mode): per component, the model's values and derivatives at the plan's
    points; the service forms those components' residuals from the parsed equation and data.
    """
    values = parse_all_regularity(classified, regularity)
    n_eq = len(classified.problem.unknowns)
    field_digests: dict[str, str] = {}
    if fields:
        both = sorted(set(fields) & set(residuals))
        if both:
            raise ResidualError(
                "fields_invalid",
                f"{both[0]!r} is sent both as residuals and as fields; send one of them",
                f"fields.{both[0]}",
            )
        formed, field_digests = residuals_from_fields(classified, plan, fields)
        residuals = {**residuals, **formed}
    arrays, digests = validate_residuals(plan, residuals, classified.components(), n_eq)
    digests = {**digests, **field_digests}
    scale = classified.residual_scale()
    if scale != 1.0 and "interior" in arrays:
        # the digests stay those of the arrays as sent; the theorem sees its own residual
        arrays = {**arrays, "interior": arrays["interior"] * scale}
    options = quadrature or QuadratureOptions()
    statistical = [
        c
        for c in plan.components.values()
        if c.rule in ("sobol", "monte-carlo") and c.name in ("interior", "initial")
    ]
    log = QuadratureLog(
        confidence=options.confidence,
        derivative_bounds=options.derivative_bounds,
        residual_bounds=options.residual_bounds,
        statistical_components=max(len(statistical), 1),
    )
    inputs = CertifyInputs(plan=plan, residuals=arrays, regularity=values)
    if plan.time is None:
        with quadrature_log(log):
            steady = classified.steady_bound(inputs)
        result = steady_result(steady)
        inequality = EnergyInequality.for_steady(steady)
    else:
        with quadrature_log(log):
            inequality = classified.energy_inequality(inputs)
        inequality, result, chosen = assemble_best(inequality, plan.time)
        inequality.warnings.extend(chosen)
    status = result.status
    warnings = list(inequality.warnings) + list(result.warnings)
    if inequality.failed_hypotheses:
        status = "invalid-hypotheses"
        warnings = [
            f"hypothesis contradicted: {m}" for m in inequality.failed_hypotheses
        ] + warnings
    quad = _quadrature_section(classified, inputs, inequality, result, log, plan)
    if quad["term"] is not None:
        result.terms.append(quad.pop("term"))
    else:
        quad.pop("term")
    warnings.extend(quad.pop("warnings"))
    rigor = weakest(cast(Rigor, result.rigor), cast(Rigor, log.weakest_rigor))
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
                "quadrature": options.model_dump(mode="json"),
                "project": project,
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
            **(
                {"l2_space": result.l2_space, "sup_space": result.sup_space}
                if plan.time is None
                else {}
            ),
            "l2_space_time": result.l2_space_time,
            "l2_final_time": result.l2_final_time,
            "log10_l2_space_time": result.log10_l2_space_time,
            "log10_l2_final_time": result.log10_l2_final_time,
        },
        "time_profile": (
            None
            if plan.time is None
            else {"t": result.profile_t, "l2_error_bound": result.profile_bound}
        ),
        "terms": result.terms,
        "constants": constants,
        "young_weight": result.young_weight,
        "warnings": warnings,
        "hypotheses": classified.hypotheses(),
        "rigor": rigor,
        "quadrature": quad,
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


def _quadrature_section(
    classified: Classified,
    inputs: CertifyInputs,
    inequality: EnergyInequality,
    result: BoundResult,
    log: QuadratureLog,
    plan: Plan,
) -> dict[str, Any]:
    """What the residual integrals used, the quadrature term, and the warnings to add."""
    warnings: list[str] = []
    rules = sorted({c.rule for c in plan.components.values()})
    if "custom" in rules:
        warnings.append(
            "custom points and weights: no quadrature error term, and if these are "
            "the training points the residual integrals are biased low"
        )
    if log.weakest_rigor == "heuristic" and "custom" not in rules:
        warnings.append(
            "the quadrature allowance of the residual integrals is a heuristic "
            "estimate (use fresh, non-training points)"
        )
    term: dict[str, Any] | None = None
    allowance = sum(s.allowance for s in log.statements)
    lam = result.young_weight.get("final_time")
    if allowance > 0 and plan.time is not None and result.l2_final_time is not None:
        plain = classified.energy_inequality(inputs)  # point estimates (no log active)
        log_plain = final_log_at(plain, plan.time, lam if lam is not None else 1.0)
        with_allowance = result.l2_final_time**2
        value = with_allowance - (math.exp(log_plain) if math.isfinite(log_plain) else 0.0)
        term = {
            "name": "quadrature allowance",
            "symbol": "Q",
            "value": max(value, 0.0),
            "formula": "bound with the upper limits of the residual integrals minus the bound "
            "with their point estimates (same Young weight)",
            "rigor": log.weakest_rigor,
            "share_final_time": (max(value, 0.0) / with_allowance) if with_allowance else None,
            "share_space_time": None,
            "detail": "; ".join(sorted({s.method for s in log.statements})),
        }
    del inequality
    return {
        "rules": rules,
        "confidence": log.confidence,
        "failure_probability": log.total_failure_probability,
        "statements": [
            {
                "component": s.component,
                "rule": s.rule,
                "rigor": s.rigor,
                "method": s.method,
                "failure_probability": s.failure_probability,
                "max_allowance": s.allowance,
                "max_estimate": s.estimate,
            }
            for s in log.statements
        ],
        "term": term,
        "warnings": warnings,
    }


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
