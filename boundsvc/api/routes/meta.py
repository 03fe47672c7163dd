"""Liveness, readiness and the family catalogue."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Depends
from fastapi.responses import JSONResponse

from api_schemas import FamilyInfo, FamilyList
from boundsvc import __version__
from boundsvc.api.deps import get_store
from boundsvc.families import CATALOGUE
from boundsvc.store import Store

router = APIRouter(prefix="/v1", tags=["service"])


@router.get("/health")
def health() -> dict[str, str]:
    """Liveness: the process answers."""
    return {"status": "ok", "version": __version__}


@router.get("/ready", responses={503: {"description": "database unreachable or schema behind"}})
def ready(store: Store = Depends(get_store)) -> Any:
    """Readiness: the database answers and its schema is current."""
    reachable = store.ping()
    status = store.schema_status() if reachable else None
    ok = bool(reachable and status is not None and status.up_to_date)
    body = {
        "status": "ready" if ok else "not-ready",
        "database": "reachable" if reachable else "unreachable",
        "schema": str(status.state) if status is not None else "unknown",
    }
    if status is not None and not status.up_to_date:
        body["action"] = status.command
    return JSONResponse(body, status_code=200 if ok else 503)


@router.get("/families", response_model=FamilyList)
def families() -> FamilyList:
    """The catalogue of stability theorems."""
    return FamilyList(
        families=[
            FamilyInfo(
                id=f.id,
                title=f.title,
                equation_form=f.equation_form,
                hypotheses=list(f.hypotheses),
                required_regularity=list(f.typical_regularity),
                optional_regularity=list(f.typical_optional),
                bounded_quantities=list(f.bounded_quantities),
                components=list(f.typical_components),
                reference=f.reference,
                theory_document=f.theory_document,
            )
            for f in CATALOGUE
        ]
    )
