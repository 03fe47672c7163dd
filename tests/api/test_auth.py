"""API keys, scopes, project isolation and the anonymous modes."""

from __future__ import annotations

import logging
from typing import Any

import pytest

from boundsvc.api.auth import AuthMode, is_loopback, required_scope
from tests.api.conftest import ApiFactory
from tests.api.support import post_certificate


def _assert_unauthorized(response: Any) -> None:
    assert response.status_code == 401, response.text
    assert response.headers["content-type"] == "application/problem+json"
    assert response.json()["code"] == "unauthorized"
    assert response.headers["www-authenticate"].startswith("Bearer")


@pytest.mark.parametrize(
    ("host", "expected"),
    [
        ("127.0.0.1", True),
        ("127.0.0.53", True),
        ("::1", True),
        ("[::1]", True),
        ("localhost", True),
        ("0.0.0.0", False),
        ("::", False),
        ("10.0.0.4", False),
        ("boundsvc.internal", False),
    ],
)
def test_is_loopback(host: str, expected: bool) -> None:
    assert is_loopback(host) is expected


@pytest.mark.parametrize(
    ("method", "path", "scope"),
    [
        ("GET", "/v1/health", None),
        ("GET", "/v1/ready", "read"),
        ("GET", "/v1/certificates", "read"),
        ("HEAD", "/v1/certificates/x", "read"),
        ("POST", "/v1/certificates", "write"),
        ("POST", "/v1/problems", "write"),
        ("GET", "/v1/keys", "admin"),
        ("DELETE", "/v1/keys/abc", "admin"),
        ("GET", "/metrics", "admin"),
        ("GET", "/v1/keysmith", "read"),
    ],
)
def test_required_scope(method: str, path: str, scope: str | None) -> None:
    assert required_scope(method, path) == scope


def test_open_mode_on_loopback_without_keys(
    api: ApiFactory, caplog: pytest.LogCaptureFixture
) -> None:
    with caplog.at_level(logging.INFO, logger="boundsvc"):
        client = api(host="127.0.0.1")
    assert client.app.state.authenticator.mode() is AuthMode.OPEN  # type: ignore[attr-defined]
    assert any("authentication: open" in r.getMessage() for r in caplog.records)
    assert client.get("/v1/certificates").status_code == 200
    assert (
        client.post(
            "/v1/problems",
            json={"problem": {"equation": "u_t = u_xx", "space": {"x": [0, 1]}, "time": [0, 1]}},
        ).status_code
        == 200
    )
    assert client.get("/metrics").status_code == 200


@pytest.mark.parametrize(
    "path", ["/v1/certificates", "/v1/ready", "/v1/families", "/metrics", "/docs", "/v1/nowhere"]
)
def test_closed_mode_off_loopback_refuses_all_but_health(
    api: ApiFactory, path: str, caplog: pytest.LogCaptureFixture
) -> None:
    with caplog.at_level(logging.INFO, logger="boundsvc"):
        client = api(host="0.0.0.0")
    assert any(
        "authentication: closed" in r.getMessage() and "0.0.0.0" in r.getMessage()
        for r in caplog.records
    )
    assert client.get("/v1/health").status_code == 200
    _assert_unauthorized(client.get(path))


def test_anonymous_disabled_on_loopback(api: ApiFactory) -> None:
    client = api(host="127.0.0.1", allow_anonymous=False)
    _assert_unauthorized(client.get("/v1/certificates"))
    assert client.get("/v1/health").status_code == 200


def test_a_key_closes_the_open_mode(api: ApiFactory, caplog: pytest.LogCaptureFixture) -> None:
    headers = api.key("lab-a", "read")
    with caplog.at_level(logging.INFO, logger="boundsvc"):
        client = api(host="127.0.0.1")
    assert any(
        "authentication: api-keys (1 active key(s))" in r.getMessage() for r in caplog.records
    )
    _assert_unauthorized(client.get("/v1/certificates"))
    assert client.get("/v1/certificates", headers=headers).status_code == 200


def test_a_key_created_while_running_closes_the_open_mode(api: ApiFactory) -> None:
    client = api(host="127.0.0.1")
    assert client.get("/v1/certificates").status_code == 200
    api.key("lab-a", "read")
    client.app.state.authenticator.invalidate()  # type: ignore[attr-defined]
    _assert_unauthorized(client.get("/v1/certificates"))


@pytest.mark.parametrize(
    "authorization",
    [
        "Bearer bsk_0123456789abcdef_" + "x" * 43,  # well formed, unknown
        "Bearer not-a-token",
        "Basic dXNlcjpwYXNz",
        "Bearer ",
    ],
)
def test_bad_credentials_are_401_in_every_mode(api: ApiFactory, authorization: str) -> None:
    client = api(host="127.0.0.1")  # open mode: a wrong key is still refused
    response = client.get("/v1/certificates", headers={"Authorization": authorization})
    _assert_unauthorized(response)
    assert response.json()["request_id"] == response.headers["x-request-id"]


def test_revoked_key_is_401(api: ApiFactory) -> None:
    headers = api.key("lab-a", "read")
    client = api()
    assert client.get("/v1/certificates", headers=headers).status_code == 200
    key_id = api.store.list_api_keys("lab-a")[0].id
    assert api.store.revoke_api_key(key_id)
    response = client.get("/v1/certificates", headers=headers)
    _assert_unauthorized(response)
    assert 'error="invalid_token"' in response.headers["www-authenticate"]


@pytest.mark.parametrize(
    ("scopes", "method", "path", "allowed"),
    [
        (("read",), "GET", "/v1/certificates", True),
        (("read",), "POST", "/v1/problems", False),
        (("write",), "GET", "/v1/certificates", False),
        (("write",), "POST", "/v1/problems", True),
        (("read", "write"), "GET", "/metrics", False),
        (("read", "write"), "GET", "/v1/keys", False),
        (("admin",), "GET", "/metrics", True),
        (("admin",), "GET", "/v1/keys", True),
        (("admin",), "GET", "/v1/certificates", False),
    ],
)
def test_scopes(
    api: ApiFactory, scopes: tuple[str, ...], method: str, path: str, allowed: bool
) -> None:
    headers = api.key("lab-a", *scopes)
    client = api()
    body = {"problem": {"equation": "u_t = u_xx", "space": {"x": [0, 1]}, "time": [0, 1]}}
    response = client.request(
        method, path, headers=headers, json=body if method == "POST" else None
    )
    if allowed:
        assert response.status_code < 400, response.text
    else:
        assert response.status_code == 403, response.text
        assert response.json()["code"] == "forbidden"


def _certificate_get_routes(client: Any) -> list[str]:
    return sorted(
        path for path, methods in _routes(client) if "{certificate_id}" in path and "GET" in methods
    )


def _routes(client: Any) -> list[tuple[str, set[str]]]:
    """Every documented route and its methods (FastAPI nests included routers)."""
    paths = client.app.openapi()["paths"]
    return [(path, {m.upper() for m in methods}) for path, methods in paths.items()]


def test_a_project_sees_only_its_certificates(any_api: ApiFactory) -> None:
    """Per endpoint: fetch, list, and every other GET route of one certificate (verify,
    archive, ... when they exist) answer another project's key as if it did not exist."""
    key_a = any_api.key("lab-a", "read", "write")
    key_b = any_api.key("lab-b", "read", "write")
    client = any_api()
    cert = post_certificate(client, key_a)
    cid = cert["id"]

    assert client.get(f"/v1/certificates/{cid}", headers=key_a).status_code == 200
    ids_a = [i["id"] for i in client.get("/v1/certificates", headers=key_a).json()["items"]]
    assert ids_a == [cid]
    listing_b = client.get("/v1/certificates", headers=key_b)
    assert listing_b.status_code == 200
    assert listing_b.json()["items"] == []
    assert (
        client.get("/v1/certificates", params={"family": cert["family"]}, headers=key_b).json()[
            "items"
        ]
        == []
    )

    routes = _certificate_get_routes(client)
    assert "/v1/certificates/{certificate_id}" in routes
    for template in routes:
        path = template.replace("{certificate_id}", cid)
        response = client.get(path, headers=key_b)
        assert response.status_code == 404, (template, response.text)
        assert response.json()["code"].endswith("not_found")
        assert "bound" not in response.json() and "provenance" not in response.text
    verify = [path for path, methods in _routes(client) if "verify" in path and "POST" in methods]
    for template in verify:
        path = template.replace("{certificate_id}", cid)
        body = {} if "{certificate_id}" in template else {"certificate_id": cid}
        response = client.post(path, headers=key_b, json=body)
        assert response.status_code in (404, 422), (template, response.text)
        assert response.status_code != 200


def test_admin_key_manages_its_projects_keys(api: ApiFactory) -> None:
    admin = api.key("lab-a", "admin")
    other_admin = api.key("lab-b", "admin")
    client = api()
    created = client.post("/v1/keys", json={"name": "ci", "scopes": ["read"]}, headers=admin)
    assert created.status_code == 201, created.text
    body = created.json()
    assert body["project"] == "lab-a" and body["token"].startswith("bsk_")
    new_key = {"Authorization": f"Bearer {body['token']}"}
    assert client.get("/v1/certificates", headers=new_key).status_code == 200

    listed = client.get("/v1/keys", headers=admin).json()["items"]
    assert {k["project"] for k in listed} == {"lab-a"}
    assert body["key_id"] in {k["key_id"] for k in listed}
    assert all("token" not in k and "secret_hash" not in k for k in listed)

    foreign = client.post(
        "/v1/keys", json={"name": "x", "scopes": ["read"], "project": "lab-b"}, headers=admin
    )
    assert foreign.status_code == 403 and foreign.json()["code"] == "forbidden"
    assert (
        client.delete(f"/v1/keys/{body['key_id']}", headers=other_admin).json()["code"]
        == "api_key_not_found"
    )
    assert client.delete(f"/v1/keys/{body['key_id']}", headers=admin).status_code == 204
    _assert_unauthorized(client.get("/v1/certificates", headers=new_key))
    again = client.delete(f"/v1/keys/{body['key_id']}", headers=admin)
    assert again.status_code == 404 and again.json()["code"] == "api_key_not_found"
