"""RFC 9457 problem+json responses, and the one place that maps exceptions to them."""

from __future__ import annotations

import logging
import uuid
from typing import Any

import orjson
from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.responses import Response

from boundsvc.api.codes import all_codes
from boundsvc.errors import BoundsvcError, ProblemNotCovered

log = logging.getLogger("boundsvc.api")

PROBLEM_JSON = "application/problem+json"
_TITLES = {
    400: "Bad request",
    404: "Not found",
    405: "Method not allowed",
    409: "Conflict",
    413: "Request body too large",
    422: "Unprocessable request",
    429: "Too many requests",
    500: "Internal server error",
    503: "Service unavailable",
}


def request_id(request: Request) -> str:
    """The request id (set by the middleware; generated if absent)."""
    rid = getattr(request.state, "request_id", None)
    if rid is None:
        rid = uuid.uuid4().hex
        request.state.request_id = rid
    return str(rid)


def problem_response(
    request: Request | None,
    status: int,
    code: str,
    detail: str,
    *,
    title: str | None = None,
    errors: list[dict[str, Any]] | None = None,
    headers: dict[str, str] | None = None,
    extra: dict[str, Any] | None = None,
) -> Response:
    """A problem+json response with the stable ``code``."""
    if code not in all_codes():  # pragma: no cover - guarded by tests of the catalogue
        raise AssertionError(f"undocumented error code {code!r}")
    body: dict[str, Any] = {
        "type": f"https://boundsvc.invalid/errors/{code}",
        "title": title or _TITLES.get(status, "Error"),
        "status": status,
        "detail": detail,
        "code": code,
        "errors": errors or [],
    }
    if request is not None:
        body["instance"] = request.url.path
        body["request_id"] = request_id(request)
    if extra:
        body.update(extra)
    hdrs = dict(headers or {})
    if request is not None:
        hdrs.setdefault("X-Request-ID", body["request_id"])
    return Response(orjson.dumps(body), status_code=status, media_type=PROBLEM_JSON, headers=hdrs)


def _field_path(loc: tuple[Any, ...] | list[Any]) -> str:
    parts = [str(p) for p in loc if p not in ("body",)]
    return ".".join(parts) if parts else "body"


def install_error_handlers(app: FastAPI) -> None:
    """Map core exceptions, validation errors, HTTP errors and bugs to problem+json."""

    @app.exception_handler(BoundsvcError)
    async def _core(request: Request, exc: BoundsvcError) -> Response:
        errors = [{"field": exc.field or "body", "message": exc.detail, "index": exc.index}]
        if exc.position is not None:
            errors[0]["position"] = exc.position
        extra: dict[str, Any] = {}
        if isinstance(exc, ProblemNotCovered):
            extra["reasons"] = exc.reasons
        return problem_response(
            request, exc.status, exc.code, exc.detail, title=exc.title, errors=errors, extra=extra
        )

    @app.exception_handler(RequestValidationError)
    async def _validation(request: Request, exc: RequestValidationError) -> Response:
        errors = []
        json_error = False
        for err in exc.errors():
            if err.get("type") == "json_invalid":
                json_error = True
            errors.append(
                {
                    "field": _field_path(err.get("loc", ())),
                    "message": str(err.get("msg", "invalid")),
                }
            )
        if json_error:
            return problem_response(
                request, 400, "invalid_json", "the request body is not valid JSON", errors=errors
            )
        first = errors[0] if errors else {"field": "body", "message": "invalid"}
        return problem_response(
            request, 422, "validation_error", f"{first['field']}: {first['message']}", errors=errors
        )

    @app.exception_handler(StarletteHTTPException)
    async def _http(request: Request, exc: StarletteHTTPException) -> Response:
        code = {404: "not_found", 405: "method_not_allowed", 413: "body_too_large"}.get(
            exc.status_code, "validation_error" if exc.status_code == 422 else "invalid_query"
        )
        if exc.status_code >= 500:
            code = "internal_error"
        return problem_response(
            request, exc.status_code, code, str(exc.detail), headers=dict(exc.headers or {})
        )

    @app.exception_handler(Exception)
    async def _bug(request: Request, exc: Exception) -> Response:
        rid = request_id(request)
        log.exception("unhandled error", extra={"request_id": rid})
        return problem_response(
            request, 500, "internal_error", f"an internal error occurred; quote request id {rid}"
        )
