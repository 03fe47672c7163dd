"""Schema-driven API fuzzing: every operation of ``/openapi.json`` against the in-process app.

For each operation, schemathesis generates requests from the OpenAPI document -- schema-valid
ones (positive) and schema-violating ones (negative) -- and each response must be no 5xx,
carry a documented status code and content type, and match the documented body and header
schemas; a schema-violating request must be refused with a 4xx.  Not checked: that every
schema-valid request is *accepted* (schemathesis' ``positive_data_acceptance``): the schema
cannot express the expression grammar or the family catalogue, so a 422 for ``"equation":
"0"`` is the right answer, not a finding.

Bounded for ``make test`` (``BOUNDSVC_API_FUZZ_EXAMPLES`` examples per operation and mode,
default 6); ``make soak`` raises it.  Failures of all operations are collected and reported
together, each with schemathesis' reproducing curl command.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

schemathesis = pytest.importorskip("schemathesis")

from hypothesis import HealthCheck, Phase, given, settings  # noqa: E402
from hypothesis.errors import Unsatisfiable  # noqa: E402
from schemathesis import GenerationMode  # noqa: E402
from schemathesis.checks import not_a_server_error  # noqa: E402
from schemathesis.specs.openapi.checks import (  # noqa: E402
    content_type_conformance,
    negative_data_rejection,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from boundsvc.api import build_app  # noqa: E402
from boundsvc.api.problem_details import PROBLEM_JSON  # noqa: E402
from boundsvc.settings import Settings  # noqa: E402
from boundsvc.store import open_store  # noqa: E402

EXAMPLES = int(os.environ.get("BOUNDSVC_API_FUZZ_EXAMPLES", "6"))
RESPONSE_CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_schema_conformance,
    response_headers_conformance,
]


@pytest.fixture
def app(tmp_path: Path) -> Iterator[Any]:
    """A fresh app and store per test: a fuzzed ``POST /v1/keys`` creates a key, which ends
    the open (no key) mode for every later request."""
    path = tmp_path / "fuzz.sqlite3"
    store = open_store(f"sqlite:///{path}")
    # no rate limit: thousands of requests from one address are the point here
    settings_ = Settings(
        database_url="unused",
        rate_limit_per_minute=0,
        symbolic_budget_seconds=3.0,
        log_level="critical",
    )
    yield build_app(settings_, store)
    store.dispose()


def _fuzz(app: Any, mode: GenerationMode) -> tuple[list[str], list[str]]:
    """Run every operation in ``mode``; return (labels run, failure reports)."""
    schema = schemathesis.openapi.from_asgi("/openapi.json", app)
    checks = RESPONSE_CHECKS + (
        [negative_data_rejection] if mode is GenerationMode.NEGATIVE else []
    )
    ran: list[str] = []
    failures: list[str] = []
    operations = [result.ok() for result in schema.get_all_operations()]
    # key management last: once a key exists, the rest would only see 401s
    operations.sort(key=lambda op: op.path.startswith("/v1/keys"))
    for operation in operations:

        @settings(
            max_examples=EXAMPLES,
            deadline=None,
            database=None,
            phases=[Phase.explicit, Phase.generate],
            suppress_health_check=list(HealthCheck),
        )
        @given(operation.as_strategy(generation_mode=mode))
        def run(case: Any) -> None:
            case.call_and_validate(checks=checks)

        try:
            run()
        except Unsatisfiable:
            continue  # nothing to negate (no parameters, or only free-form strings)
        except Exception as exc:  # a check failure: collect, report all at the end
            failures.append(f"{operation.label} [{mode.name}]: {exc}")
        ran.append(operation.label)
    return ran, failures


def test_schema_valid_requests_get_documented_answers_and_no_5xx(app: Any) -> None:
    ran, failures = _fuzz(app, GenerationMode.POSITIVE)
    assert "POST /v1/certificates" in ran and "POST /v1/problems" in ran, ran
    assert failures == [], "\n\n".join(failures)


def test_schema_violating_requests_are_refused_with_4xx(app: Any) -> None:
    ran, failures = _fuzz(app, GenerationMode.NEGATIVE)
    assert "POST /v1/certificates" in ran, ran
    assert failures == [], "\n\n".join(failures)


def test_every_operation_documents_problem_json_errors(app: Any) -> None:
    """The OpenAPI amendment of boundsvc/api/openapi.py: each operation documents 422, 4XX
    and 503 as problem+json, and FastAPI's never-sent validation body is gone."""
    document = app.openapi()
    operations = [
        op for item in document["paths"].values() for op in item.values() if "responses" in op
    ]
    assert len(operations) >= 10
    for operation in operations:
        for status in ("422", "4XX", "503"):
            content = operation["responses"][status]["content"]
            assert list(content) == [PROBLEM_JSON], (operation.get("operationId"), status)
        assert "500" not in operation["responses"]
    assert "HTTPValidationError" not in document["components"]["schemas"]
