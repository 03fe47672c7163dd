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


#: pydantic names the member of a union it tried in the error location ("float", "str",
#: "list[float]", "EncodedArray", "function-after[...]"); request field names are snake_case.
_TYPE_TAGS = frozenset({"float", "int", "str", "bool", "dict", "list", "tuple", "none"})


def _is_union_tag(part: Any) -> bool:
    return isinstance(part, str) and (
        part in _TYPE_TAGS or "[" in part or (part[:1].isupper() and part.isidentifier())
    )


def _field_path(loc: tuple[Any, ...] | list[Any]) -> str:
    parts = [str(p) for p in loc if p not in ("body", "query", "path") and not _is_union_tag(p)]
    return ".".join(parts) if parts else "body"


def _validation_errors(raw: list[Any]) -> list[dict[str, Any]]:
    """The field errors of a validation failure, one union member per field.

    A value that fits no member of a union (``number | expression``, ``JSON rows | base64``)
    gives one error per member; the first member tried is the field's main form, so only
    its errors are kept (``regularity.k: Input should be a valid number``, not also "a valid
    string"). The union tags are dropped from the path; ``index`` is the last array index.
    """
    chosen: dict[tuple[Any, ...], Any] = {}
    out: list[dict[str, Any]] = []
    seen: set[tuple[str, str]] = set()
    for err in raw:
        loc = tuple(err.get("loc", ()))
        tag_at = next((i for i, p in enumerate(loc) if _is_union_tag(p)), None)
        if tag_at is not None:
            prefix = loc[:tag_at]
            if chosen.setdefault(prefix, loc[tag_at]) != loc[tag_at]:
                continue
        entry: dict[str, Any] = {
            "field": _field_path(loc),
            "message": str(err.get("msg", "invalid")),
        }
        key = (entry["field"], entry["message"])
        if key in seen:
            continue
        seen.add(key)
        index = next((p for p in reversed(loc) if isinstance(p, int)), None)
        if index is not None:
            entry["index"] = index
        out.append(entry)
    return out


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
        raw = list(exc.errors())
        json_error = any(err.get("type") == "json_invalid" for err in raw)
        errors = _validation_errors(raw)
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
