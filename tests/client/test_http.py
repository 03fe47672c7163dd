"""The HTTP client against scripted answers (httpx.MockTransport): headers, retries, errors,
the residual wire format, pagination and plan files. No server needed."""

from __future__ import annotations

import base64
import datetime as dt
import email.utils
import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest

from boundsvc.client import (
    BoundsvcClient,
    BoundsvcClientError,
    Plan,
    RetryPolicy,
    ServiceUnavailable,
    encode_residuals,
)
from boundsvc.client._http import parse_retry_after

PROBLEM = {
    "equation": "u_t = k*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": 0.4},
}

PLAN_BODY = {
    "plan_id": "pln_1",
    "rule": "gauss-legendre",
    "problem_id": "prb_1",
    "components": [
        {
            "name": "interior",
            "axes": ["t", "x"],
            "points": [[0.1, 0.2], [0.3, 0.4]],
            "weights": [0.25, 0.25],
            "size": 2,
        },
        {
            "name": "initial",
            "axes": ["x"],
            "points": [[0.2], [0.8]],
            "weights": [0.5, 0.5],
            "size": 2,
        },
    ],
    "axis_nodes": {"t": [0.1, 0.3], "x": [0.2, 0.4]},
    "time_nodes": [0.1, 0.3],
}


def certificate_body(cid: str = "crt_1", status: str = "valid") -> dict[str, Any]:
    return {
        "id": cid,
        "status": status,
        "family": "advection-diffusion-reaction",
        "bound": {"l2_space_time": 0.01, "l2_final_time": 0.02},
        "time_profile": {"t": [0.0, 0.5], "l2_error_bound": [0.001, 0.02]},
        "terms": [
            {
                "name": "interior residual",
                "symbol": "R",
                "value": 1e-4,
                "formula": "int R^2",
                "rigor": "heuristic",
            }
        ],
        "constants": [],
        "warnings": [],
        "provenance": {
            "service_version": "0.1.0",
            "libraries": {},
            "problem_sha256": "a",
            "inputs_sha256": "b",
            "plan_id": "pln_1",
            "theorem": "t",
            "created_at": "2025-01-01T00:00:00+00:00",
        },
    }


def problem_json(status: int, code: str, detail: str = "nope", **extra: Any) -> httpx.Response:
    body = {
        "type": f"https://boundsvc.invalid/errors/{code}",
        "title": "t",
        "status": status,
        "detail": detail,
        "code": code,
        "errors": [],
        **extra,
    }
    return httpx.Response(status, json=body, headers={"content-type": "application/problem+json"})


class Script:
    """A MockTransport handler answering from a list, recording every request."""

    def __init__(
        self, *answers: httpx.Response | Exception | Callable[[httpx.Request], httpx.Response]
    ):
        self.answers = list(answers)
        self.requests: list[httpx.Request] = []

    def __call__(self, request: httpx.Request) -> httpx.Response:
        self.requests.append(request)
        answer = self.answers.pop(0) if len(self.answers) > 1 else self.answers[0]
        if isinstance(answer, Exception):
            raise answer
        if callable(answer):
            return answer(request)
        return answer


def client_for(script: Script, sleeps: list[float] | None = None, **kwargs: Any) -> BoundsvcClient:
    record = sleeps if sleeps is not None else []
    return BoundsvcClient(
        "http://svc.test", transport=httpx.MockTransport(script), sleep=record.append, **kwargs
    )


# -- configuration ---------------------------------------------------------------------


def test_url_and_key_come_from_the_environment(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("BOUNDSVC_URL", "http://from-env.test:9000/")
    monkeypatch.setenv("BOUNDSVC_API_KEY", "sekret")
    script = Script(httpx.Response(200, json={"status": "ok", "version": "0.1.0"}))
    with BoundsvcClient(transport=httpx.MockTransport(script)) as client:
        assert client.base_url == "http://from-env.test:9000"
        assert client.health() == {"status": "ok", "version": "0.1.0"}
    req = script.requests[0]
    assert str(req.url) == "http://from-env.test:9000/v1/health"
    assert req.headers["authorization"] == "Bearer sekret"
    assert req.headers["user-agent"].startswith("boundsvc-client/")


def test_arguments_override_the_environment(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("BOUNDSVC_URL", "http://from-env.test")
    monkeypatch.setenv("BOUNDSVC_API_KEY", "env-key")
    script = Script(httpx.Response(200, json={"status": "ok"}))
    with BoundsvcClient(
        "http://arg.test", api_key="arg-key", transport=httpx.MockTransport(script)
    ) as client:
        client.health()
    assert script.requests[0].url.host == "arg.test"
    assert script.requests[0].headers["authorization"] == "Bearer arg-key"


def test_no_key_no_authorization_header(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("BOUNDSVC_API_KEY", raising=False)
    script = Script(httpx.Response(200, json={"status": "ok"}))
    with client_for(script) as client:
        client.health()
    assert "authorization" not in script.requests[0].headers


def test_bad_url_is_refused() -> None:
    with pytest.raises(ValueError, match="must start with http"):
        BoundsvcClient("svc.test:8000")


def test_explicit_timeouts_reach_the_request() -> None:
    seen: list[dict[str, Any]] = []

    def handler(request: httpx.Request) -> httpx.Response:
        seen.append(request.extensions["timeout"])
        return httpx.Response(200, json={"status": "ok"})

    with BoundsvcClient(
        "http://svc.test", timeout=3.5, transport=httpx.MockTransport(handler)
    ) as client:
        client.health()
    assert seen[0] == {"connect": 3.5, "read": 3.5, "write": 3.5, "pool": 3.5}


# -- retries ------------------------------------------------------------------------------


def test_get_is_retried_on_503_then_succeeds() -> None:
    sleeps: list[float] = []
    script = Script(
        problem_json(503, "store_unavailable"),
        httpx.Response(502),
        httpx.Response(200, json={"status": "ok"}),
    )
    with client_for(script, sleeps, retries=RetryPolicy(max_retries=3, backoff=0.5)) as c:
        assert c.health()["status"] == "ok"
    assert len(script.requests) == 3
    assert len(sleeps) == 2
    assert 0.25 <= sleeps[0] <= 0.5 and 0.5 <= sleeps[1] <= 1.0  # doubled, with jitter


def test_429_waits_for_retry_after() -> None:
    sleeps: list[float] = []
    script = Script(
        httpx.Response(429, headers={"Retry-After": "7"}),
        httpx.Response(200, json={"status": "ok"}),
    )
    with client_for(script, sleeps) as client:
        client.health()
    assert sleeps == [7.0]


def test_retry_after_as_http_date() -> None:
    now = dt.datetime(2025, 1, 1, 12, 0, 0, tzinfo=dt.UTC)
    later = email.utils.format_datetime(now + dt.timedelta(seconds=30), usegmt=True)
    assert parse_retry_after(later, now=now) == pytest.approx(30.0)
    assert parse_retry_after("soon") is None


def test_retry_after_beyond_the_cap_stops_retrying() -> None:
    sleeps: list[float] = []
    script = Script(
        problem_json(429, "rate_limited", "slow down"), httpx.Response(200, json={"status": "ok"})
    )
    script.answers[0].headers["Retry-After"] = "3600"
    policy = RetryPolicy(max_retry_after=60)
    with client_for(script, sleeps, retries=policy) as c, pytest.raises(ServiceUnavailable) as info:
        c.health()
    assert sleeps == []
    assert info.value.status == 429
    assert info.value.body["retry_after"] == "3600"


def test_exhausted_retries_raise_service_unavailable_with_the_code() -> None:
    sleeps: list[float] = []
    script = Script(problem_json(503, "store_unavailable", "database down"))
    with client_for(script, sleeps, retries=2) as c, pytest.raises(ServiceUnavailable) as info:
        c.certificate("crt_1")
    assert len(script.requests) == 3
    err = info.value
    assert isinstance(err, BoundsvcClientError)
    assert (err.status, err.code, err.detail) == (503, "store_unavailable", "database down")
    assert err.retryable


def test_post_without_idempotency_key_is_not_retried() -> None:
    script = Script(httpx.Response(503), httpx.Response(200, json={}))
    with client_for(script) as client, pytest.raises(ServiceUnavailable):
        client.problem(PROBLEM, idempotent=False)
    assert len(script.requests) == 1
    assert "idempotency-key" not in script.requests[0].headers


def test_certify_is_idempotent_by_default_and_keeps_its_key_across_retries() -> None:
    script = Script(
        httpx.ConnectError("refused"),
        httpx.Response(504),
        httpx.Response(201, json=certificate_body()),
    )
    with client_for(script) as client:
        cert = client.certify("prb_1", "pln_1", {"sup_abs_u_x": 3.0}, {"interior": [0.0]})
    assert cert.id == "crt_1"
    keys = {r.headers["idempotency-key"] for r in script.requests}
    assert len(script.requests) == 3 and len(keys) == 1
    # a new logical call gets a new key
    script2 = Script(httpx.Response(201, json=certificate_body()))
    with client_for(script2) as client:
        client.certify("prb_1", "pln_1", {}, {"interior": [0.0]})
    assert script2.requests[0].headers["idempotency-key"] not in keys


def test_explicit_idempotency_key_is_sent() -> None:
    script = Script(httpx.Response(201, json=certificate_body()))
    with client_for(script) as client:
        client.certify("prb_1", "pln_1", {}, {"interior": [0.0]}, idempotency_key="abc-123")
    assert script.requests[0].headers["idempotency-key"] == "abc-123"


def test_connection_errors_are_retried_then_reported() -> None:
    sleeps: list[float] = []
    script = Script(httpx.ConnectError("connection refused"))
    with client_for(script, sleeps, retries=2) as c, pytest.raises(ServiceUnavailable) as info:
        c.health()
    assert len(script.requests) == 3 and len(sleeps) == 2
    assert info.value.status is None and info.value.code == "unreachable"
    assert "after 3 attempts" in info.value.detail


def test_read_timeout_is_not_retried() -> None:
    script = Script(httpx.ReadTimeout("slow"))
    with client_for(script) as client, pytest.raises(ServiceUnavailable) as info:
        client.health()
    assert len(script.requests) == 1
    assert info.value.code == "timeout"


def test_4xx_is_not_retried_and_carries_the_problem_details() -> None:
    body = {
        "type": "x",
        "title": "Unprocessable",
        "status": 422,
        "code": "regularity_missing",
        "detail": "the theorem needs sup_abs_u_x",
        "request_id": "rid42",
        "errors": [{"field": "regularity.sup_abs_u_x", "message": "missing", "index": None}],
    }
    script = Script(httpx.Response(422, json=body))
    with client_for(script) as client, pytest.raises(BoundsvcClientError) as info:
        client.certify("prb_1", "pln_1", {}, {"interior": [1.0]})
    err = info.value
    assert not isinstance(err, ServiceUnavailable)
    assert len(script.requests) == 1
    assert (err.status, err.code, err.request_id) == (422, "regularity_missing", "rid42")
    assert err.errors[0].field == "regularity.sup_abs_u_x"
    assert "regularity.sup_abs_u_x: missing" in str(err)
    assert not err.retryable


def test_non_problem_json_error_body() -> None:
    script = Script(httpx.Response(500, text="<html>oops</html>", headers={"x-request-id": "r1"}))
    with client_for(script) as client, pytest.raises(BoundsvcClientError) as info:
        client.health()
    assert info.value.code == "http_500"
    assert info.value.request_id == "r1"
    assert "oops" in info.value.detail


def test_unexpected_answer_shape_is_a_client_error() -> None:
    script = Script(httpx.Response(200, json={"families": [{"id": 1}]}))
    with (
        client_for(script) as client,
        pytest.raises(BoundsvcClientError, match="does not match FamilyList") as info,
    ):
        client.families()
    assert info.value.code == "invalid_response"


# -- the residual wire format -------------------------------------------------------------


def test_residuals_travel_as_base64_little_endian_float64() -> None:
    values = np.array([1.5, -2.0, 1e-300, np.pi])
    encoded = encode_residuals({"interior": values})["interior"]
    assert encoded["dtype"] == "float64" and encoded["encoding"] == "base64"
    raw = base64.b64decode(encoded["data"])
    assert np.array_equal(np.frombuffer(raw, dtype="<f8"), values)


def test_systems_are_flattened_in_c_order_and_columns_squeezed() -> None:
    rows = np.arange(6.0).reshape(3, 2)
    raw = base64.b64decode(encode_residuals({"interior": rows})["interior"]["data"])
    assert np.frombuffer(raw, "<f8").tolist() == [0.0, 1.0, 2.0, 3.0, 4.0, 5.0]
    column = encode_residuals({"i": np.ones((4, 1))}, "json")["i"]
    assert column == [1.0, 1.0, 1.0, 1.0]


def test_json_encoding_refuses_non_finite_values_with_the_index() -> None:
    with pytest.raises(ValueError, match=r"residuals\['initial'\] is not finite at index 2"):
        encode_residuals({"initial": [0.0, 1.0, np.nan]}, "json")


def test_residuals_must_be_numbers() -> None:
    with pytest.raises(ValueError, match=r"residuals\['interior'\] is not an array of numbers"):
        encode_residuals({"interior": ["a", "b"]})
    with pytest.raises(ValueError, match="must have shape"):
        encode_residuals({"interior": np.zeros((2, 2, 2))})


def test_certify_request_body() -> None:
    script = Script(httpx.Response(201, json=certificate_body()))
    with client_for(script) as client:
        client.certify(
            PROBLEM,
            Plan.from_response(_plan_response()),
            {"sup_abs_u_x": 2, "sup_abs_model_u_x": "1 + t"},
            {"interior": np.zeros(2)},
            model={"name": "wave", "version": "3", "epoch": 10},
        )
    body = json.loads(script.requests[0].content)
    assert body["problem"]["equation"] == "u_t = k*u_xx"
    assert body["plan_id"] == "pln_1"
    assert body["regularity"] == {"sup_abs_u_x": 2.0, "sup_abs_model_u_x": "1 + t"}
    assert body["model"] == {"name": "wave", "version": "3", "epoch": 10, "metadata": {}}
    assert body["residuals"]["interior"]["encoding"] == "base64"
    assert script.requests[0].headers["content-type"] == "application/json"


def test_non_finite_regularity_is_refused_before_sending() -> None:
    script = Script(httpx.Response(201, json=certificate_body()))
    with client_for(script) as client, pytest.raises(ValueError, match="must be finite"):
        client.certify("prb_1", "pln_1", {"sup_abs_u_x": float("inf")}, {"interior": [0.0]})
    assert script.requests == []


def test_upload_progress_reaches_the_total() -> None:
    script = Script(httpx.Response(201, json=certificate_body()))
    seen: list[tuple[int, int]] = []
    big = {"interior": np.random.default_rng(0).normal(size=100_000)}
    with client_for(script) as client:
        client.certify("prb_1", "pln_1", {}, big, progress=lambda a, b: seen.append((a, b)))
    total = int(script.requests[0].headers["content-length"])
    assert seen[0] == (0, total) and seen[-1] == (total, total)
    assert len(seen) > 3
    assert len(script.requests[0].content) == total


# -- listing --------------------------------------------------------------------------------


def _summary(i: int) -> dict[str, Any]:
    return {
        "id": f"crt_{i}",
        "status": "valid",
        "family": "f",
        "created_at": "2025-01-01T00:00:00+00:00",
        "model_name": "wave",
    }


def test_certificates_iterates_over_pages() -> None:
    def handler(request: httpx.Request) -> httpx.Response:
        start = int(request.url.params.get("cursor", "0"))
        limit = int(request.url.params["limit"])
        items = [_summary(i) for i in range(start, min(start + limit, 5))]
        nxt = str(start + limit) if start + limit < 5 else None
        return httpx.Response(200, json={"items": items, "next_cursor": nxt})

    script = Script(handler)
    with client_for(script) as client:
        ids = [s.id for s in client.certificates(model="wave", version="2", page_size=2)]
        assert ids == [f"crt_{i}" for i in range(5)]
        assert [s.id for s in client.certificates(limit=3, page_size=2)] == [
            "crt_0",
            "crt_1",
            "crt_2",
        ]
    first = script.requests[0].url.params
    assert (first["model"], first["model_version"], first["limit"]) == ("wave", "2", "2")
    assert script.requests[-1].url.params["limit"] == "1"  # the last page asks for what is left


def test_latest_certificate() -> None:
    script = Script(
        httpx.Response(200, json={"items": [_summary(7)], "next_cursor": "x"}),
        httpx.Response(200, json=certificate_body("crt_7")),
    )
    with client_for(script) as client:
        cert = client.latest_certificate("wave", "2")
    assert cert is not None and cert.id == "crt_7"
    assert script.requests[0].url.params["limit"] == "1"
    empty = Script(httpx.Response(200, json={"items": [], "next_cursor": None}))
    with client_for(empty) as client:
        assert client.latest_certificate("nobody") is None


def test_ids_cannot_escape_the_path() -> None:
    client = client_for(Script(httpx.Response(200)))
    with client, pytest.raises(ValueError, match="not a valid id"):
        client.certificate("../v1/health")


def test_report_returns_the_rendered_document() -> None:
    script = Script(
        httpx.Response(
            200, text="<h1>report</h1>", headers={"content-type": "text/html; charset=utf-8"}
        )
    )
    with client_for(script) as client:
        report = client.report("crt_1")
    assert report.media_type == "text/html" and report.text == "<h1>report</h1>"
    assert script.requests[0].url.path == "/v1/certificates/crt_1/report"


# -- plans ------------------------------------------------------------------------------------


def _plan_response() -> Any:
    from api_schemas import PlanResponse

    return PlanResponse.model_validate(PLAN_BODY)


def test_plan_arrays() -> None:
    script = Script(httpx.Response(201, json=PLAN_BODY))
    with client_for(script) as client:
        plan = client.plan(PROBLEM, points={"t": 2, "x": 2}, panels={"t": 1})
    body = json.loads(script.requests[0].content)
    assert body == {
        "problem": PROBLEM,
        "rule": "gauss-legendre",
        "points": {"t": 2, "x": 2},
        "panels": {"t": 1},
    }
    assert plan.names == ("interior", "initial")
    interior = plan["interior"]
    assert interior.points.shape == (2, 2) and interior.points.dtype == np.float64
    assert interior.axes == ("t", "x") and interior.size == 2
    assert plan["initial"].points.shape == (2, 1)
    assert np.array_equal(interior.column("x"), [0.2, 0.4])
    with pytest.raises(KeyError, match="no component 'boundary'"):
        plan["boundary"]
    with pytest.raises(ValueError):
        interior.points[0, 0] = 1.0  # plans are read-only


def test_plan_by_problem_id() -> None:
    script = Script(httpx.Response(201, json=PLAN_BODY))
    with client_for(script) as client:
        client.plan("prb_1", points={"t": 2})
    assert json.loads(script.requests[0].content)["problem_id"] == "prb_1"


@pytest.mark.parametrize("suffix", [".npz", ".json"])
def test_plan_files_round_trip(tmp_path: Path, suffix: str) -> None:
    plan = Plan.from_response(_plan_response())
    path = tmp_path / f"plan{suffix}"
    plan.save(path)
    again = Plan.load(path)
    assert (again.plan_id, again.problem_id, again.names) == ("pln_1", "prb_1", plan.names)
    for name in plan.names:
        assert np.array_equal(again[name].points, plan[name].points)
        assert np.array_equal(again[name].weights, plan[name].weights)
        assert again[name].axes == plan[name].axes
    assert np.array_equal(again.time_nodes, plan.time_nodes)


def test_plan_file_suffix_is_checked(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match=r"must end in \.npz or \.json"):
        Plan.from_response(_plan_response()).save(tmp_path / "plan.txt")


def test_idempotent_call_in_progress_is_asked_again() -> None:
    """409 idempotency_in_progress: the first attempt with the key still runs on the service."""
    sleeps: list[float] = []
    busy = problem_json(409, "idempotency_in_progress", "still running")
    busy.headers["Retry-After"] = "1"
    script = Script(busy, httpx.Response(201, json=certificate_body()))
    with client_for(script, sleeps) as client:
        assert client.certify("prb_1", "pln_1", {}, {"interior": [0.0]}).id == "crt_1"
    assert sleeps == [1.0]
    assert len({r.headers["idempotency-key"] for r in script.requests}) == 1
    other = Script(problem_json(409, "certificate_conflict"))
    with client_for(other, sleeps) as client, pytest.raises(BoundsvcClientError) as info:
        client.certify("prb_1", "pln_1", {}, {"interior": [0.0]})
    assert len(other.requests) == 1 and info.value.code == "certificate_conflict"
