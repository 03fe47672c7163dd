"""Listing over HTTP: a malformed cursor is a 400 problem naming the field."""

from __future__ import annotations

import pytest

from boundsvc.api import build_app
from boundsvc.settings import Settings
from tests.inprocess import InProcessClient


@pytest.mark.parametrize("cursor", ["not-a-cursor", "%%%", "eyJ4Ijog"])
def test_malformed_cursor_is_a_400_problem(sqlite_url: str, cursor: str) -> None:
    client = InProcessClient(build_app(Settings(database_url=sqlite_url)))
    try:
        response = client.get("/v1/certificates", params={"cursor": cursor})
    finally:
        client.close()
    assert response.status_code == 400
    assert response.headers["content-type"].startswith("application/problem+json")
    body = response.json()
    assert body["code"] == "invalid_cursor"
    assert body["title"] == "Bad request"
    assert body["status"] == 400
    assert [e["field"] for e in body.get("errors", [])] == ["cursor"]
