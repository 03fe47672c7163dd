"""The stable machine codes of every error body (``code`` in problem+json).

``docs/errors.md`` lists exactly these codes; a test checks that the two agree.
"""

from __future__ import annotations

from typing import get_args

from boundsvc.expr import ExpressionErrorCode

# code -> (HTTP status, meaning)
SERVICE_CODES: dict[str, tuple[int, str]] = {
    "validation_error": (422, "The request body does not match the schema (see errors[])."),
    "invalid_json": (400, "The request body is not valid JSON."),
    "problem_invalid": (422, "The problem object is inconsistent (e.g. data depend on t)."),
    "problem_unknowns_mismatch": (422, "The number of equations and unknowns differ."),
    "problem_not_covered": (
        422,
        "No family of the catalogue covers the equation; the detail says why for each family.",
    ),
    "problem_not_found": (404, "No stored problem has this id."),
    "plan_invalid": (422, "The plan request cannot be honoured (counts, axes)."),
    "plan_not_found": (404, "No stored plan has this id."),
    "plan_problem_mismatch": (422, "The plan was made for another problem."),
    "regularity_missing": (422, "A regularity key the theorem needs is missing."),
    "regularity_unknown_key": (422, "A regularity key is not used by the theorem (typo guard)."),
    "regularity_negative": (422, "A regularity value is negative somewhere on the interval."),
    "regularity_invalid": (422, "A regularity value cannot be used (not finite, unbounded)."),
    "residual_missing": (422, "A residual component the theorem needs is missing."),
    "fields_invalid": (
        422,
        "Fields mode: a component or field name the service cannot use, or missing data.",
    ),
    "residual_unknown_component": (422, "A residual component is not in the plan."),
    "residual_length": (422, "A component has a different number of values than the plan."),
    "residual_shape": (422, "A component's rows do not match the number of equations."),
    "residual_not_finite": (422, "A residual value is NaN or infinite (index given)."),
    "residual_encoding": (422, "Broken base64 or a byte count that is not whole values."),
    "residual_dtype": (422, "An unsupported dtype was sent."),
    "certificate_not_found": (404, "No certificate with this id is visible to the caller."),
    "certificate_conflict": (409, "A different certificate is stored under the same id."),
    "not_archived": (
        409,
        "The certificate has no residual archive, so it cannot be "
        "re-verified (certify with archive: true).",
    ),
    "archive_not_found": (404, "The certificate exists but has no residual archive."),
    "archive_corrupt": (
        409,
        "The stored residual archive fails its SHA-256 or cannot be "
        "decoded; the certificate cannot be re-verified.",
    ),
    "invalid_cursor": (400, "The pagination cursor is malformed."),
    "invalid_query": (422, "A query parameter is malformed."),
    "not_found": (404, "No such route."),
    "method_not_allowed": (405, "The route does not accept this method."),
    "body_too_large": (413, "The request body exceeds the configured maximum."),
    "unauthorized": (
        401,
        "No valid API key: missing (where one is required), malformed, "
        "unknown or revoked. Sent with WWW-Authenticate: Bearer.",
    ),
    "forbidden": (403, "The API key lacks the scope this route needs (read, write, admin)."),
    "api_key_not_found": (404, "No active API key with this id is visible to the caller."),
    "rate_limited": (
        429,
        "Too many requests for this key (or client address); wait for Retry-After seconds.",
    ),
    "idempotency_key_invalid": (
        400,
        "The Idempotency-Key header is empty, longer than 256 characters or not printable ASCII.",
    ),
    "idempotency_mismatch": (
        422,
        "The Idempotency-Key was already used with a different request body.",
    ),
    "idempotency_in_progress": (
        409,
        "A request with this Idempotency-Key is still running; retry after Retry-After seconds.",
    ),
    "study_not_found": (404, "No study with this id is visible to the caller."),
    "study_invalid": (422, "The study cannot be computed from these certificates."),
    "store_unavailable": (503, "The database cannot be reached."),
    "schema_out_of_date": (503, "The database schema is behind; run boundsvc db upgrade."),
    "problem_too_complex": (422, "The symbolic derivation exceeded its time or memory budget."),
    "service_busy": (503, "Every symbolic worker is busy; retry shortly."),
    "internal_error": (500, "A bug: the body carries a request id to report."),
}

EXPRESSION_CODES: tuple[str, ...] = tuple(get_args(ExpressionErrorCode))


def all_codes() -> dict[str, int]:
    """Every code the service can answer with, and its HTTP status."""
    codes = {code: status for code, (status, _) in SERVICE_CODES.items()}
    for code in EXPRESSION_CODES:
        codes.setdefault(code, 422)
    return codes
