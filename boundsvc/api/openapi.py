"""The OpenAPI document says what the service really answers: problem+json errors.

FastAPI documents a ``422`` with its own ``HTTPValidationError`` body as ``application/json``,
and nothing else; the service answers every error as RFC 9457 ``application/problem+json``
(see ``problem_details.py``) with 4xx codes FastAPI never sees (404 unknown ids, 401/403 keys,
409 idempotency, 413 body limit, 429 rate limit) and 503 when the store or the symbolic
workers are unavailable.  Found by fuzzing the API against its own schema
(tests/hardening/test_api_fuzz.py).  A 500 stays undocumented on purpose: it is a bug.
"""

from __future__ import annotations

from typing import Any

from fastapi import FastAPI

from boundsvc.api.problem_details import PROBLEM_JSON

PROBLEM_SCHEMA: dict[str, Any] = {
    "title": "Problem",
    "description": "RFC 9457 problem details; `code` is stable (docs/errors.md).",
    "type": "object",
    "required": ["type", "title", "status", "detail", "code"],
    "properties": {
        "type": {"type": "string"},
        "title": {"type": "string"},
        "status": {"type": "integer"},
        "detail": {"type": "string"},
        "code": {"type": "string"},
        "errors": {
            "type": "array",
            "items": {
                "type": "object",
                "properties": {"field": {"type": "string"}, "message": {"type": "string"}},
            },
        },
        "instance": {"type": "string"},
        "request_id": {"type": "string"},
    },
}

_REF = {"$ref": "#/components/schemas/Problem"}
_ERRORS = {
    "422": "the request is well-formed but cannot be honoured (see `code` and `errors`)",
    "4XX": "a client error: bad JSON, unknown id, missing key or scope, conflict, "
    "body too large, rate limited (see `code`)",
    "503": "the database or the symbolic workers are unavailable; retry later",
}


def with_problem_responses(document: dict[str, Any]) -> dict[str, Any]:
    """``document`` with every operation's error responses documented as problem+json."""
    document.setdefault("components", {}).setdefault("schemas", {})["Problem"] = PROBLEM_SCHEMA
    for path_item in document.get("paths", {}).values():
        for operation in path_item.values():
            if not isinstance(operation, dict) or "responses" not in operation:
                continue
            responses = operation["responses"]
            for status, description in _ERRORS.items():
                responses[status] = {
                    "description": description,
                    "content": {PROBLEM_JSON: {"schema": _REF}},
                }
    # FastAPI's own validation-error bodies are never sent.
    for unused in ("HTTPValidationError", "ValidationError"):
        document["components"]["schemas"].pop(unused, None)
    return document


def install_openapi(app: FastAPI) -> None:
    """Serve the corrected document at ``/openapi.json`` (FastAPI's, amended once, cached)."""
    build = app.openapi
    amended: list[dict[str, Any]] = []

    def openapi() -> dict[str, Any]:
        if not amended:
            amended.append(with_problem_responses(build()))
        return amended[0]

    app.openapi = openapi  # type: ignore[method-assign]
