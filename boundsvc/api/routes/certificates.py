"""Certificates: create (POST), fetch one, list (newest first, paginated), and re-verify
from a residual archive (``POST /v1/certificates/{id}/verify``)."""

from __future__ import annotations

import datetime as dt
from typing import Any

from fastapi import APIRouter, Depends, Query, Request
from starlette.concurrency import run_in_threadpool
from starlette.responses import Response

from api_schemas import (
    ArchiveMetadata,
    CertificatePage,
    CertificateRequest,
    VerificationReport,
    VerifyRequest,
)
from boundsvc.api.deps import Caller, get_caller, get_settings_dep, get_store
from boundsvc.api.routes._resolve import resolve_plan, resolve_problem
from boundsvc.api.routes._transport import decode_upload, read_body, split_octets
from boundsvc.api.routes._verification import (
    archive_json,
    archive_residuals,
    verification_report,
)
from boundsvc.certify import build_plan, certify
from boundsvc.errors import BoundsvcError, NotFound
from boundsvc.settings import Settings
from boundsvc.store import (
    ArchiveContents,
    ArchiveCorrupt,
    ArchiveInfo,
    CertificateConflict,
    InvalidCursor,
    Store,
    StoredCertificate,
    decode_residual_archive,
)

router = APIRouter(prefix="/v1", tags=["certificates"])

JSON = "application/json"


@router.post(
    "/certificates", status_code=201, responses={201: {"description": "the certificate (stored)"}}
)
def post_certificate(
    body: CertificateRequest,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
    settings: Settings = Depends(get_settings_dep),
) -> Response:
    """Compute, store and return a certificate (residuals as JSON lists or base64)."""
    return create_certificate(store, caller, body, None, archive_default=settings.archive_residuals)


@router.post(
    "/certificates/upload",
    status_code=201,
    responses={201: {"description": "the certificate (stored)"}},
    openapi_extra={
        "requestBody": {
            "required": True,
            "content": {
                "application/x-npz": {"schema": {"type": "string", "format": "binary"}},
                "application/octet-stream": {"schema": {"type": "string", "format": "binary"}},
            },
        },
        "parameters": [
            {
                "name": "X-Boundsvc-Request",
                "in": "header",
                "required": False,
                "schema": {"type": "string"},
                "description": "octet-stream only: base64url of the request JSON",
            }
        ],
    },
)
async def upload_certificate(
    request: Request,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
    settings: Settings = Depends(get_settings_dep),
) -> Response:
    """Residuals as binary: one ``.npz`` (arrays per component and a ``request`` member), or
    raw little-endian float64 components concatenated in plan order (``octet-stream``, the
    rest of the request in the ``X-Boundsvc-Request`` header). See docs/api.md."""
    raw = await read_body(request)  # one buffer, not a list of chunks plus their join
    content_type = request.headers.get("content-type", "").split(";")[0].strip().lower()
    body, arrays = decode_upload(content_type, raw, request.headers.get("x-boundsvc-request"))
    resolved = await run_in_threadpool(_resolve_layout, store, body, arrays)
    return await run_in_threadpool(
        lambda: create_certificate(
            store, caller, body, resolved, archive_default=settings.archive_residuals
        )
    )


def _resolve_layout(
    store: Store, body: CertificateRequest, arrays: dict[str, Any]
) -> dict[str, Any]:
    """Split a raw octet-stream into components using the plan's sizes."""
    if "__raw__" not in arrays:
        return arrays
    _, pid, classified = resolve_problem(store, body.problem, body.problem_id)
    plan = _plan_for(store, classified, pid, body)
    return split_octets(
        arrays["__raw__"], plan, arrays.get("__layout__"), len(classified.problem.unknowns)
    )


def _plan_for(store: Store, classified: Any, pid: str, body: CertificateRequest) -> Any:
    if body.plan_id is not None:
        return resolve_plan(store, classified, pid, body.plan_id)
    assert body.plan is not None
    spec = {
        "problem_id": pid,
        "rule": "custom",
        "components": {k: v.model_dump(mode="json") for k, v in sorted(body.plan.items())},
    }
    return build_plan(classified, spec)


def create_certificate(
    store: Store,
    caller: Caller,
    body: CertificateRequest,
    arrays: dict[str, Any] | None,
    *,
    archive_default: bool = False,
) -> Response:
    """Resolve problem and plan, certify, store (content-addressed, first write wins).

    With ``archive`` (the request's flag, else the deployment default) the decoded residuals
    are archived beside the certificate; the flag is not part of the certificate id, so an
    archive can be added to a stored certificate by posting the same inputs again.
    """
    problem, pid, classified = resolve_problem(store, body.problem, body.problem_id)
    plan = _plan_for(store, classified, pid, body)
    residuals: dict[str, Any] = dict(body.residuals)
    if arrays:
        residuals.update(arrays)
    doc = certify(
        classified,
        pid,
        plan,
        body.regularity,
        residuals,
        body.model,
        quadrature=body.quadrature,
        project=caller.write_project,
    )
    stored = store.get_certificate(doc.id, None)
    if stored is None:
        stored = _store_certificate(store, caller, body, doc, classified, pid, plan)
    if body.archive if body.archive is not None else archive_default:
        archive_residuals(
            store,
            doc.id,
            problem=problem,
            problem_id=pid,
            plan=plan,
            classified=classified,
            body=body,
            residuals=residuals,
            project=caller.write_project,
        )
    return Response(stored.document, status_code=201, media_type=JSON)


def _store_certificate(
    store: Store,
    caller: Caller,
    body: CertificateRequest,
    doc: Any,
    classified: Any,
    pid: str,
    plan: Any,
) -> StoredCertificate:
    model = body.model
    try:
        return store.put_certificate(
            id=doc.id,
            project=caller.write_project,
            model_name=(model.name if model and model.name else ""),
            model_version=model.version if model else None,
            family=classified.family.id,
            status=doc.document["status"],
            document=doc.body,
            problem_id=pid,
            plan_id=plan.plan_id if body.plan_id is not None else None,
            created_at=dt.datetime.fromisoformat(doc.document["provenance"]["created_at"]),
        )
    except CertificateConflict:
        # the same inputs were certified concurrently: the first stored document wins
        stored = store.get_certificate(doc.id, None)
        if stored is None:  # pragma: no cover - a conflict implies a stored row
            raise
        return stored


@router.get("/certificates/{certificate_id}", responses={200: {"description": "the certificate"}})
def get_certificate(
    certificate_id: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> Response:
    """The stored certificate, byte for byte as it was stored."""
    stored = store.get_certificate(certificate_id, caller.project)
    if stored is None:
        raise NotFound(
            "certificate_not_found", f"no certificate with id {certificate_id!r}", "certificate_id"
        )
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
            caller.project,
            model_name=model or model_name,
            model_version=version or model_version,
            family=family,
            status=status,
            created_after=created_after,
            created_before=created_before,
            limit=limit,
            cursor=cursor,
        )
    except InvalidCursor as exc:
        err = BoundsvcError("invalid_cursor", str(exc), "cursor")
        err.status, err.title = 400, "Bad request"
        raise err from exc
    return {
        "items": [
            {
                "id": s.id,
                "status": s.status,
                "family": s.family,
                "created_at": s.created_at.isoformat(),
                "model_name": s.model_name or None,
                "model_version": s.model_version,
                "project": s.project,
            }
            for s in page.items
        ],
        "next_cursor": page.next_cursor,
    }


def _visible(store: Store, caller: Caller, certificate_id: str) -> StoredCertificate:
    stored = store.get_certificate(certificate_id, caller.project)
    if stored is None:
        raise NotFound(
            "certificate_not_found", f"no certificate with id {certificate_id!r}", "certificate_id"
        )
    return stored


@router.get("/certificates/{certificate_id}/archive", response_model=ArchiveMetadata)
def get_archive(
    certificate_id: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> Any:
    """Codec, SHA-256, size and time of the certificate's residual archive (blob not sent)."""
    _visible(store, caller, certificate_id)
    info = store.archive_info(certificate_id, caller.project)
    if info is None:
        raise NotFound(
            "archive_not_found",
            f"certificate {certificate_id!r} has no residual archive",
            "certificate_id",
        )
    return archive_json(info)


@router.post("/certificates/{certificate_id}/verify", response_model=VerificationReport)
def verify_certificate(
    certificate_id: str,
    body: VerifyRequest | None = None,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> Any:
    """Recompute the certificate from its residual archive with the running version and
    report whether it still matches, and what changed (nothing is stored)."""
    stored = _visible(store, caller, certificate_id)
    info, contents = _archive_of(store, caller, certificate_id)
    return verification_report(stored, info, contents, (body or VerifyRequest()).rtol)


def _archive_of(
    store: Store, caller: Caller, certificate_id: str
) -> tuple[ArchiveInfo, ArchiveContents]:
    """The archive's metadata and contents; 409 ``not_archived`` or ``archive_corrupt``."""
    info = store.archive_info(certificate_id, caller.project)
    contents = None
    try:
        archive = store.get_archive(certificate_id, caller.project) if info else None
        if archive is not None:
            contents = decode_residual_archive(archive.blob, archive.codec)
    except ArchiveCorrupt as exc:
        err = BoundsvcError(
            "archive_corrupt",
            f"the residual archive of {certificate_id!r} cannot be used: {exc}",
            "certificate_id",
        )
        err.status, err.title = 409, "Archive corrupt"
        raise err from exc
    if info is None or contents is None:  # none, or purged between the two reads
        err = BoundsvcError(
            "not_archived",
            f"certificate {certificate_id!r} has no residual archive to recompute it from "
            '(certify with "archive": true, or BOUNDSVC_ARCHIVE_RESIDUALS=1)',
            "certificate_id",
        )
        err.status, err.title = 409, "Not archived"
        raise err
    return info, contents
