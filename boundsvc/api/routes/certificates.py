"""Certificates: create (POST), fetch one, and list (newest first, paginated)."""

from __future__ import annotations

import datetime as dt
from typing import Any

from fastapi import APIRouter, Depends, Query
from starlette.responses import Response

from api_schemas import CertificatePage, CertificateRequest
from boundsvc.api.deps import Caller, get_caller, get_store
from boundsvc.api.routes._resolve import resolve_plan, resolve_problem
from boundsvc.certify import certify
from boundsvc.errors import BoundsvcError, NotFound, PlanInvalid
from boundsvc.store import CertificateConflict, InvalidCursor, Store

router = APIRouter(prefix="/v1", tags=["certificates"])

JSON = "application/json"


@router.post("/certificates", status_code=201,
             responses={201: {"description": "the certificate (stored)"}})
def post_certificate(body: CertificateRequest, store: Store = Depends(get_store),
                     caller: Caller = Depends(get_caller)) -> Response:
    """Compute, store and return a certificate."""
    _, pid, classified = resolve_problem(store, body.problem, body.problem_id)
    if body.plan_id is None:
        raise PlanInvalid("plan_invalid", "inline plans are not accepted on this version; "
                          "request a plan with POST /v1/plans and send its plan_id", "plan")
    plan = resolve_plan(store, classified, pid, body.plan_id)
    doc = certify(classified, pid, plan, body.regularity, body.residuals, body.model)
    existing = store.get_certificate(doc.id, None)
    if existing is not None:
        return Response(existing.document, status_code=201, media_type=JSON)
    model = body.model
    try:
        store.put_certificate(
            id=doc.id, project=caller.write_project,
            model_name=(model.name if model and model.name else ""),
            model_version=model.version if model else None,
            family=classified.family.id, status=doc.document["status"], document=doc.body,
            problem_id=pid, plan_id=plan.plan_id,
            created_at=dt.datetime.fromisoformat(doc.document["provenance"]["created_at"]),
        )
    except CertificateConflict:
        # the same inputs were certified concurrently: the first stored document wins
        stored = store.get_certificate(doc.id, None)
        if stored is None:  # pragma: no cover - a conflict implies a stored row
            raise
        return Response(stored.document, status_code=201, media_type=JSON)
    return Response(doc.body, status_code=201, media_type=JSON)


@router.get("/certificates/{certificate_id}", responses={200: {"description": "the certificate"}})
def get_certificate(certificate_id: str, store: Store = Depends(get_store),
                    caller: Caller = Depends(get_caller)) -> Response:
    """The stored certificate, byte for byte as it was stored."""
    stored = store.get_certificate(certificate_id, caller.project)
    if stored is None:
        raise NotFound("certificate_not_found", f"no certificate with id {certificate_id!r}",
                       "certificate_id")
    return Response(stored.document, media_type=JSON)


@router.get("/certificates", response_model=CertificatePage)
def list_certificates(
    model: str | None = Query(default=None, description="model name"),
    model_name: str | None = Query(default=None, description="alias of model"),
    version: str | None = Query(default=None, description="model version"),
    model_version: str | None = Query(default=None, description="alias of version"),
    family: str | None = Query(default=None),
    status: str | None = Query(default=None),
    created_after: dt.datetime | None = Query(default=None),
    created_before: dt.datetime | None = Query(default=None),
    limit: int = Query(default=50, ge=1, le=500),
    cursor: str | None = Query(default=None),
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> Any:
    """Certificates newest first; pass ``next_cursor`` back as ``cursor`` for the next page."""
    for name, value in (("created_after", created_after), ("created_before", created_before)):
        if value is not None and value.tzinfo is None:
            raise BoundsvcError("invalid_query", f"{name} needs a timezone (e.g. ...Z)", name)
    try:
        page = store.list_certificates(
            caller.project, model_name=model or model_name,
            model_version=version or model_version, family=family,
            status=status, created_after=created_after, created_before=created_before,
            limit=limit, cursor=cursor)
    except InvalidCursor as exc:
        err = BoundsvcError("invalid_cursor", str(exc), "cursor")
        err.status = 400
        raise err from exc
    return {
        "items": [
            {"id": s.id, "status": s.status, "family": s.family,
             "created_at": s.created_at.isoformat(), "model_name": s.model_name or None,
             "model_version": s.model_version, "project": s.project}
            for s in page.items
        ],
        "next_cursor": page.next_cursor,
    }
