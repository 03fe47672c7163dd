"""Studies: compare the bounds of several certificates with measured errors (``/v1/studies``)."""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import math
from typing import Any

from fastapi import APIRouter, Depends, Query
from fastapi.responses import JSONResponse
from starlette.responses import HTMLResponse, Response

from api_schemas._study import Study, StudyList, StudyRequest
from boundsvc import reports
from boundsvc.api.deps import Caller, get_caller, get_store
from boundsvc.api.routes.reports import html_page, image
from boundsvc.errors import BoundsvcError, NotFound
from boundsvc.reports import ImageFormat
from boundsvc.store import ContentConflict, Store, StoredStudy

router = APIRouter(prefix="/v1", tags=["studies"])


def study_id_for(project: str, body: StudyRequest) -> str:
    """Content address of a study: the same request in the same project, the same study."""
    canonical = json.dumps(
        {"project": project, "request": body.model_dump(mode="json")},
        sort_keys=True,
        separators=(",", ":"),
    )
    return "std_" + hashlib.sha256(canonical.encode("utf-8")).hexdigest()[:32]


def _json_safe(value: Any) -> Any:
    """Non-finite floats become None (the store refuses NaN, JSON has no infinity)."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_json_safe(v) for v in value]
    return value


def load_study(store: Store, caller: Caller, study_id: str) -> StoredStudy:
    stored = store.get_study(study_id, caller.project)
    if stored is None:
        raise NotFound("study_not_found", f"no study with id {study_id!r}", "study_id")
    return stored


def study_summary(stored: StoredStudy) -> dict[str, Any]:
    doc = stored.document
    eff = doc.get("effectivity") or {}
    return {
        "id": stored.id,
        "title": doc.get("title"),
        "created_at": doc.get("created_at", ""),
        "certificates": len(doc.get("certificate_ids") or []),
        "median_effectivity": eff.get("median"),
    }


@router.post(
    "/studies",
    status_code=201,
    response_model=Study,
    responses={201: {"description": "the study (stored)"}},
)
def post_study(
    body: StudyRequest, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> Any:
    """Compute and store a study of visible certificates (posting it again returns it)."""
    study_id = study_id_for(caller.write_project, body)
    existing = store.get_study(study_id, caller.project)
    if existing is not None:
        return JSONResponse(existing.document, status_code=201)
    documents = []
    for index, cid in enumerate(body.certificate_ids):
        stored = store.get_certificate(cid, caller.project)
        if stored is None:
            raise NotFound(
                "certificate_not_found",
                f"no certificate with id {cid!r}",
                f"certificate_ids.{index}",
            )
        documents.append(json.loads(stored.document))
    now = dt.datetime.now(dt.UTC)
    swept = body.swept_parameter
    try:
        document = reports.assemble_study(
            study_id=study_id,
            title=body.title,
            documents=documents,
            measured_errors=body.measured_errors,
            parameter_name=swept.name if swept else None,
            parameter_values=swept.values if swept else None,
            bound_quantity=body.bound,
            confidence=body.confidence_level,
            created_at=now.isoformat(timespec="milliseconds"),
        )
    except ValueError as exc:  # pragma: no cover - the schema validates the same rules
        raise BoundsvcError("study_invalid", str(exc), "body") from exc
    try:
        stored_study = store.put_study(
            study_id, caller.write_project, _json_safe(document), created_at=now
        )
    except ContentConflict:
        # the same study was posted concurrently (another created_at): the first one wins
        stored_study = load_study(store, caller, study_id)
    return JSONResponse(stored_study.document, status_code=201)


@router.get("/studies", response_model=StudyList)
def list_studies(
    limit: int = Query(default=100, ge=1, le=500),
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> Any:
    """Studies newest first."""
    return {"items": [study_summary(s) for s in store.list_studies(caller.project, limit=limit)]}


@router.get("/studies/{study_id}", response_model=Study)
def get_study(
    study_id: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> Any:
    """The stored study."""
    return JSONResponse(load_study(store, caller, study_id).document)


def study_plots(prefix: str, document: dict[str, Any]) -> dict[str, str]:
    """Image URLs of a study page (only the plots that have data)."""
    plots = {}
    if any(i.get("measured_error") is not None for i in document.get("items") or []):
        plots["scatter"] = f"{prefix}/scatter.png"
    if document.get("swept_parameter"):
        plots["sweep"] = f"{prefix}/sweep.png"
    return plots


@router.get("/studies/{study_id}/page", response_class=HTMLResponse)
def study_page(
    study_id: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> HTMLResponse:
    """The study as an HTML page."""
    doc = load_study(store, caller, study_id).document
    plots = study_plots(f"/v1/studies/{study_id}", doc)
    return html_page(reports.render_study_page(doc, plots=plots))


def study_image(
    store: Store, caller: Caller, study_id: str, kind: str, fmt: ImageFormat
) -> Response:
    doc = load_study(store, caller, study_id).document
    items = doc.get("items") or []
    if kind == "scatter":
        return image(reports.study_scatter(items, fmt), fmt)
    name = (doc.get("swept_parameter") or {}).get("name") or "parameter"
    return image(reports.study_sweep(items, str(name), fmt), fmt)


@router.get(
    "/studies/{study_id}/{kind}.png",
    responses={200: {"content": {"image/png": {}}, "description": "a study plot"}},
)
def study_plot_png(
    study_id: str,
    kind: str,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> Response:
    """``scatter.png`` (bound vs measured error) or ``sweep.png`` (against the parameter)."""
    return study_image(store, caller, study_id, _kind(kind), "png")


@router.get(
    "/studies/{study_id}/{kind}.svg",
    responses={200: {"content": {"image/svg+xml": {}}, "description": "a study plot"}},
)
def study_plot_svg(
    study_id: str,
    kind: str,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> Response:
    """The same plots as SVG."""
    return study_image(store, caller, study_id, _kind(kind), "svg")


def _kind(kind: str) -> str:
    if kind not in ("scatter", "sweep"):
        raise NotFound("not_found", f"no plot {kind!r}: use scatter or sweep", "kind")
    return kind
