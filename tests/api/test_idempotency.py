"""Idempotency-Key: replay, mismatch, in progress, abandon on failure."""

from __future__ import annotations

import json
import random

import pytest

from boundsvc.api.idempotency import request_digest
from boundsvc.api.routes import problems
from boundsvc.store import Started
from tests.api.conftest import ApiFactory
from tests.api.support import HEAT_PROBLEM, certificate_body, prepare

PROBLEM_BODY = {"problem": HEAT_PROBLEM}


def test_replay_returns_the_first_response(any_api: ApiFactory) -> None:
    client = any_api()
    regularity, plan = prepare(client)
    body = certificate_body(regularity, plan, random.Random(1))
    headers = {"Idempotency-Key": "cert-1"}
    first = client.post("/v1/certificates", json=body, headers=headers)
    assert first.status_code == 201, first.text
    assert "idempotent-replayed" not in first.headers
    second = client.post("/v1/certificates", json=body, headers=headers)
    assert second.status_code == 201
    assert second.headers["idempotent-replayed"] == "true"
    assert second.headers["content-type"] == "application/json"
    assert second.content == first.content  # byte for byte, created_at included
    page = any_api.store.list_certificates(None)
    assert [c.id for c in page.items] == [first.json()["id"]]


def test_same_key_other_body_is_a_mismatch(any_api: ApiFactory) -> None:
    client = any_api()
    headers = {"Idempotency-Key": "p-1"}
    assert client.post("/v1/problems", json=PROBLEM_BODY, headers=headers).status_code == 200
    other = {"problem": {**HEAT_PROBLEM, "parameters": {"k": 0.5}}}
    response = client.post("/v1/problems", json=other, headers=headers)
    assert response.status_code == 422
    assert response.json()["code"] == "idempotency_mismatch"
    # the same key on another endpoint is another request too
    plan = client.post("/v1/plans", json=PROBLEM_BODY, headers=headers)
    assert plan.json()["code"] == "idempotency_mismatch"


def test_a_running_request_is_409(api: ApiFactory) -> None:
    client = api()
    raw = json.dumps(PROBLEM_BODY).encode()
    digest = request_digest("POST", "/v1/problems", raw)
    assert isinstance(api.store.begin_idempotent("default", "busy", digest), Started)
    response = client.post(
        "/v1/problems",
        content=raw,
        headers={"Idempotency-Key": "busy", "Content-Type": "application/json"},
    )
    assert response.status_code == 409
    assert response.json()["code"] == "idempotency_in_progress"
    assert response.headers["retry-after"] == "1"


def test_a_stale_running_claim_is_taken_over(api: ApiFactory) -> None:
    client = api(idempotency_stale_seconds=0.0)
    raw = json.dumps(PROBLEM_BODY).encode()
    digest = request_digest("POST", "/v1/problems", raw)
    api.store.begin_idempotent("default", "dead-worker", digest)
    response = client.post(
        "/v1/problems",
        content=raw,
        headers={"Idempotency-Key": "dead-worker", "Content-Type": "application/json"},
    )
    assert response.status_code == 200, response.text


def test_a_failed_request_is_abandoned_so_a_retry_runs(
    api: ApiFactory, monkeypatch: pytest.MonkeyPatch
) -> None:
    client = api(raise_server_exceptions=False)
    headers = {"Idempotency-Key": "flaky"}
    real = problems.resolve_problem

    def broken(*args: object, **kwargs: object) -> object:
        raise RuntimeError("database hiccup")

    monkeypatch.setattr(problems, "resolve_problem", broken)
    failed = client.post("/v1/problems", json=PROBLEM_BODY, headers=headers)
    assert failed.status_code == 500
    assert failed.json()["code"] == "internal_error"
    monkeypatch.setattr(problems, "resolve_problem", real)
    retried = client.post("/v1/problems", json=PROBLEM_BODY, headers=headers)
    assert retried.status_code == 200, retried.text
    assert "idempotent-replayed" not in retried.headers


def test_client_errors_are_recorded_and_replayed(api: ApiFactory) -> None:
    client = api()
    headers = {"Idempotency-Key": "bad-1"}
    first = client.post("/v1/problems", json={"problem": {"equation": "u_t = "}}, headers=headers)
    assert first.status_code == 422
    second = client.post("/v1/problems", json={"problem": {"equation": "u_t = "}}, headers=headers)
    assert second.status_code == 422
    assert second.headers["idempotent-replayed"] == "true"
    assert second.headers["content-type"] == "application/problem+json"
    assert second.json()["code"] == first.json()["code"]


def test_keys_are_per_project(api: ApiFactory) -> None:
    key_a = api.key("lab-a", "write")
    key_b = api.key("lab-b", "write")
    client = api()
    first = client.post(
        "/v1/problems", json=PROBLEM_BODY, headers={**key_a, "Idempotency-Key": "shared"}
    )
    other = {"problem": {**HEAT_PROBLEM, "parameters": {"k": 0.1}}}
    second = client.post("/v1/problems", json=other, headers={**key_b, "Idempotency-Key": "shared"})
    assert first.status_code == 200 and second.status_code == 200
    assert "idempotent-replayed" not in second.headers


@pytest.mark.parametrize("key", [b"x" * 257, "caf\u00e9".encode(), b"tab\there"])
def test_invalid_keys_are_400(api: ApiFactory, key: bytes) -> None:
    client = api()
    response = client.post("/v1/problems", json=PROBLEM_BODY, headers={"Idempotency-Key": key})
    assert response.status_code == 400
    assert response.json()["code"] == "idempotency_key_invalid"


def test_the_body_limit_applies_and_leaves_no_claim(api: ApiFactory) -> None:
    client = api(max_body_bytes=64)

    def chunks():  # no Content-Length: the limit trips while streaming
        for _ in range(10):
            yield b" " * 32

    response = client.post(
        "/v1/problems",
        content=chunks(),
        headers={"Idempotency-Key": "big", "Content-Type": "application/json"},
    )
    assert response.status_code == 413
    assert response.json()["code"] == "body_too_large"
    assert isinstance(api.store.begin_idempotent("default", "big", "0" * 64), Started)


def test_get_requests_ignore_the_header(api: ApiFactory) -> None:
    client = api()
    for _ in range(2):
        response = client.get("/v1/certificates", headers={"Idempotency-Key": "g"})
        assert response.status_code == 200
        assert "idempotent-replayed" not in response.headers
    assert isinstance(api.store.begin_idempotent("default", "g", "0" * 64), Started)
