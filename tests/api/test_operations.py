"""Health, readiness, metrics, structured logs and the start-up schema check."""

from __future__ import annotations

import json
import logging
import re

import pytest
from sqlalchemy import create_engine, text

from boundsvc.api import build_app
from boundsvc.api.logs import JsonFormatter
from boundsvc.api.routes import problems
from boundsvc.settings import Settings
from boundsvc.store import SchemaOutOfDate, StoreUnavailable, open_store
from tests.api.conftest import ApiFactory


def test_health_and_ready(api: ApiFactory) -> None:
    client = api(host="0.0.0.0")
    health = client.get("/v1/health")
    assert health.status_code == 200 and health.json()["status"] == "ok"
    admin = api.key("ops", "read")
    ready = client.get("/v1/ready", headers=admin)
    assert ready.status_code == 200
    assert ready.json() == {"status": "ready", "database": "reachable", "schema": "up_to_date"}


def _sample(text_: str, name: str, **labels: str) -> float | None:
    for line in text_.splitlines():
        if not line.startswith(name + "{"):
            continue
        found = dict(re.findall(r'(\w+)="([^"]*)"', line.rsplit(" ", 1)[0]))
        if found == labels:
            return float(line.rsplit(" ", 1)[1])
    return None


def test_metrics_count_requests_by_route_template_and_status(api: ApiFactory) -> None:
    client = api()
    for cid in ("a", "b", "c"):
        assert client.get(f"/v1/certificates/{cid}").status_code == 404
    client.get("/no/such/route")
    refused = client.get("/v1/certificates/d", headers={"Authorization": "Bearer nope"})
    assert refused.status_code == 401  # answered before routing, still labelled by template
    response = client.get("/metrics")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("text/plain")
    body = response.text
    labels = {"method": "GET", "route": "/v1/certificates/{certificate_id}", "status": "404"}
    assert _sample(body, "boundsvc_http_requests_total", **labels) == 3.0
    assert _sample(body, "boundsvc_http_request_duration_seconds_count", **labels) == 3.0
    assert (
        _sample(body, "boundsvc_http_request_duration_seconds_bucket", **labels, le="+Inf") == 3.0
    )
    assert (
        _sample(body, "boundsvc_http_requests_total", method="GET", route="unmatched", status="404")
        == 1.0
    )
    assert "/no/such/route" not in body
    assert (
        _sample(
            body,
            "boundsvc_http_requests_total",
            method="GET",
            route="/v1/certificates/{certificate_id}",
            status="401",
        )
        == 1.0
    )


def test_metrics_count_certificates_from_the_store_at_scrape_time(api: ApiFactory) -> None:
    client = api()
    for i, (status, family) in enumerate(
        [("valid", "heat"), ("valid", "heat"), ("vacuous", "burgers")]
    ):
        api.store.put_certificate(
            id=f"c{i}",
            project="p",
            model_name="m",
            model_version=None,
            family=family,
            status=status,
            document=b'{"x": 1}',
        )
    body = client.get("/metrics").text
    assert _sample(body, "boundsvc_certificates", status="valid", family="heat") == 2.0
    assert _sample(body, "boundsvc_certificates", status="vacuous", family="burgers") == 1.0
    assert "boundsvc_store_up 1.0" in body
    api.store.put_certificate(
        id="c9",
        project="q",
        model_name="m",
        model_version=None,
        family="heat",
        status="valid",
        document=b'{"x": 2}',
    )
    body = client.get("/metrics").text
    assert _sample(body, "boundsvc_certificates", status="valid", family="heat") == 3.0


def test_one_json_access_line_per_request(
    api: ApiFactory, caplog: pytest.LogCaptureFixture
) -> None:
    headers = api.key("lab-a", "read")
    client = api()
    with caplog.at_level(logging.INFO, logger="boundsvc.access"):
        response = client.get("/v1/certificates/missing", headers=headers)
    assert response.status_code == 404
    records = [r for r in caplog.records if r.name == "boundsvc.access"]
    assert len(records) == 1
    line = json.loads(JsonFormatter().format(records[0]))
    rid = response.headers["x-request-id"]
    assert response.json()["request_id"] == rid
    assert line["request_id"] == rid
    assert line["method"] == "GET"
    assert line["route"] == "/v1/certificates/{certificate_id}"
    assert line["status"] == 404
    assert line["project"] == "lab-a"
    assert isinstance(line["duration_ms"], float) and line["duration_ms"] >= 0
    assert line["level"] == "info" and line["logger"] == "boundsvc.access"


def test_request_id_from_the_client_is_kept_when_sane(api: ApiFactory) -> None:
    client = api()
    kept = client.get("/v1/health", headers={"X-Request-ID": "abc-123"})
    assert kept.headers["x-request-id"] == "abc-123"
    replaced = client.get("/v1/health", headers={"X-Request-ID": "<script>"})
    assert re.fullmatch(r"[0-9a-f]{32}", replaced.headers["x-request-id"])


def test_a_500_carries_the_logged_request_id_and_no_traceback(
    api: ApiFactory, monkeypatch: pytest.MonkeyPatch, caplog: pytest.LogCaptureFixture
) -> None:
    client = api(raise_server_exceptions=False)

    def broken(*args: object, **kwargs: object) -> object:
        raise RuntimeError("secret internals")

    monkeypatch.setattr(problems, "resolve_problem", broken)
    with caplog.at_level(logging.INFO, logger="boundsvc"):
        response = client.post("/v1/problems", json={"problem": {"equation": "u_t = u_xx"}})
    assert response.status_code == 500
    body = response.json()
    assert body["code"] == "internal_error"
    assert "secret internals" not in response.text and "Traceback" not in response.text
    access = [r for r in caplog.records if r.name == "boundsvc.access"]
    assert access[-1].__dict__["status"] == 500
    assert access[-1].__dict__["request_id"] == body["request_id"]
    assert response.headers["x-request-id"] == body["request_id"]


def test_build_app_refuses_a_schema_that_is_behind(
    sqlite_url: str, caplog: pytest.LogCaptureFixture
) -> None:
    open_store(sqlite_url).dispose()
    engine = create_engine(sqlite_url)
    with engine.begin() as conn:
        conn.execute(text("DELETE FROM alembic_version"))
    engine.dispose()
    with caplog.at_level(logging.ERROR, logger="boundsvc"), pytest.raises(SchemaOutOfDate) as info:
        build_app(Settings(database_url=sqlite_url))
    assert info.value.command == f"boundsvc db upgrade --database-url {sqlite_url}"
    assert any(info.value.command in r.getMessage() for r in caplog.records)


def test_a_database_outage_is_503_not_500(api: ApiFactory, monkeypatch: pytest.MonkeyPatch) -> None:
    headers = api.key("lab-a", "read")
    client = api()

    def down(*args: object, **kwargs: object) -> object:
        raise StoreUnavailable("database unavailable: connection refused at db.internal")

    monkeypatch.setattr(api.store, "get_certificate", down)
    response = client.get("/v1/certificates/x", headers=headers)
    assert response.status_code == 503
    assert response.json()["code"] == "store_unavailable"
    assert response.headers["retry-after"] == "5"
    assert "db.internal" not in response.text  # the details stay in the log

    monkeypatch.setattr(api.store, "verify_api_key", down)
    refused = client.get("/v1/certificates", headers=headers)
    assert refused.status_code == 503 and refused.json()["code"] == "store_unavailable"
