"""Certificates: create (POST), fetch one, list (newest first, paginated), and re-verify
from a residual archive (``POST /v1/certificates/{id}/verify``)."""

from __future__ import annotations

import binascii
import datetime as dt
import email.message
import json
import re
from typing import Annotated, Any

import numpy as np
import orjson
from fastapi import APIRouter, Depends, HTTPException, Query, Request
from fastapi.exceptions import RequestValidationError
from pydantic import BeforeValidator, ValidationError
from starlette.concurrency import run_in_threadpool
from starlette.responses import Response

from api_schemas import (
    ArchiveMetadata,
    CertificatePage,
    CertificateRequest,
    EncodedArray,
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
from boundsvc.fields import FIELDS_PREFIX
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


# Served by ``post_certificate_json`` (matched first, not in the schema): the body is read
# into one buffer, parsed by orjson and its base64 residuals decoded straight into arrays
# (FastAPI would keep the chunks, the joined body, the parsed text and the decoded bytes
# at once). ``post_certificate`` below documents the same body in the OpenAPI document
# and behaves the same if it is ever reached.
@router.post("/certificates", status_code=201, include_in_schema=False)
async def post_certificate_json(
    request: Request,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
    settings: Settings = Depends(get_settings_dep),
) -> Response:
    """Compute, store and return a certificate (residuals as JSON lists or base64)."""
    parsed = await _json_body(request)
    return await run_in_threadpool(
        _validated_certificate, store, caller, settings.archive_residuals, [parsed]
    )


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


def _validated_certificate(
    store: Store, caller: Caller, archive_default: bool, holder: list[Any]
) -> Response:
    """Validate the parsed body (``holder[0]``, dropped once validated), decode its base64
    residuals, then certify."""
    body = _validate_body(holder.pop())
    _decode_base64_residuals(body)
    return create_certificate(store, caller, body, None, archive_default=archive_default)


_EMPTY = object()  # no body at all (FastAPI: "Field required" at ``body``)


def _is_json_type(content_type: str | None) -> bool:
    """FastAPI's test: ``application/json`` or ``application/*+json`` (parameters ignored)."""
    if not content_type:
        return False  # FastAPI's strict content type: no header, no JSON
    message = email.message.Message()
    message["content-type"] = content_type
    subtype = message.get_content_subtype()
    return message.get_content_maintype() == "application" and (
        subtype == "json" or subtype.endswith("+json")
    )


async def _json_body(request: Request) -> Any:
    """The body as FastAPI handed it to validation, with FastAPI's errors (400 ``invalid_json``
    with the position; 400 for a body that cannot be read or decoded), read into one buffer
    (:func:`read_body`) and parsed by orjson; the buffer is dropped when parsed.

    When orjson refuses a body, the standard ``json`` module (FastAPI's parser) decides: it
    accepts a little more (``NaN``/``Infinity``, UTF-16/32 and a UTF-8 BOM, integers beyond 64
    bits, lone surrogates) and reports the position of a syntax error as before.
    """
    try:
        raw = await read_body(request)
        if not raw:
            return _EMPTY
        if not _is_json_type(request.headers.get("content-type")):
            return bytes(raw)  # FastAPI validates the raw bytes (a schema error)
        try:
            return orjson.loads(raw)
        except orjson.JSONDecodeError:
            return json.loads(raw)
    except json.JSONDecodeError as exc:
        raise RequestValidationError(
            [
                {
                    "type": "json_invalid",
                    "loc": ("body", exc.pos),
                    "msg": "JSON decode error",
                    "input": {},
                    "ctx": {"error": exc.msg},
                }
            ]
        ) from exc
    except HTTPException:
        raise
    except Exception as exc:  # as FastAPI: undecodable bytes, nesting too deep, disconnect
        raise HTTPException(status_code=400, detail="There was an error parsing the body") from exc


def _validate_body(parsed: Any) -> CertificateRequest:
    """``parsed`` validated as FastAPI does (``from_attributes``, errors under ``body``)."""
    if parsed is _EMPTY:
        errors: list[Any] = [
            {"type": "missing", "loc": ("body",), "msg": "Field required", "input": None}
        ]
    else:
        try:
            return CertificateRequest.model_validate(parsed, from_attributes=True)
        except ValidationError as exc:
            errors = [
                {**err, "loc": ("body", *err["loc"])} for err in exc.errors(include_url=False)
            ]
    raise RequestValidationError(errors)


def _decode_base64_residuals(body: CertificateRequest) -> None:
    """Replace each base64 residual of ``body`` by its array (a view of the decoded bytes) and
    drop its text at once, so that text and bytes of one component at most coexist.

    What does not decode cleanly (bad base64, a partial value) is left as it is: certifying
    reports it where it did before (after the problem, the plan and the component names were
    checked), with the same code. An array decodes to what the encoded value decodes to.
    """
    residuals: dict[str, Any] = body.residuals  # arrays go in
    for name, values in residuals.items():
        if not isinstance(values, EncodedArray):
            continue
        itemsize = 4 if values.dtype == "float32" else 8
        try:
            raw = binascii.a2b_base64(values.data, strict_mode=True)
        except (binascii.Error, ValueError):
            continue
        if len(raw) % itemsize:
            continue
        residuals[name] = np.frombuffer(raw, dtype="<f4" if itemsize == 4 else "<f8")
        del values, raw


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
    fields: dict[str, dict[str, Any]] = {c: dict(v) for c, v in (body.fields or {}).items()}
    for name, value in (arrays or {}).items():
        if name.startswith(FIELDS_PREFIX):  # an upload member ``fields.<component>.<name>``
            component, _, field = name[len(FIELDS_PREFIX) :].partition(".")
            fields.setdefault(component, {})[field] = value
        else:
            residuals[name] = value
    doc = certify(
        classified,
        pid,
        plan,
        body.regularity,
        residuals,
        body.model,
        quadrature=body.quadrature,
        project=caller.write_project,
        fields=fields or None,
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
            fields=fields or None,
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


_NUMBER = re.compile(r"\s*[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?\s*")


def _iso_only(value: Any) -> Any:
    """pydantic reads a number as a Unix time; the listing filters take ISO 8601 only (a
    schema-fuzzing finding: ``created_before=-76613`` was accepted)."""
    if isinstance(value, str) and _NUMBER.fullmatch(value):
        raise ValueError("an ISO 8601 date-time with a timezone (e.g. 2026-01-31T12:00:00Z)")
    return value


IsoDateTime = Annotated[dt.datetime, BeforeValidator(_iso_only)]


@router.get("/certificates", response_model=CertificatePage)
def list_certificates(
    model: str | None = Query(default=None, description="model name"),
    model_name: str | None = Query(default=None, description="alias of model"),
    version: str | None = Query(default=None, description="model version"),
    model_version: str | None = Query(default=None, description="alias of version"),
    family: str | None = Query(default=None),
    status: str | None = Query(default=None),
    created_after: IsoDateTime | None = Query(default=None),
    created_before: IsoDateTime | None = Query(default=None),
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
