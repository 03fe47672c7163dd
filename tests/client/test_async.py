"""The asynchronous client: the same wire logic, awaited (MockTransport, asyncio.run)."""

from __future__ import annotations

import asyncio
import json
from collections.abc import Coroutine
from typing import Any, TypeVar

import httpx
import numpy as np
import pytest

from boundsvc.client import AsyncBoundsvcClient, BoundsvcClientError, ServiceUnavailable
from tests.client.test_http import PLAN_BODY, Script, certificate_body, problem_json

T = TypeVar("T")


def run(coro: Coroutine[Any, Any, T]) -> T:
    return asyncio.run(coro)


def make(script: Script, sleeps: list[float], **kwargs: Any) -> AsyncBoundsvcClient:
    async def sleep(seconds: float) -> None:
        sleeps.append(seconds)

    return AsyncBoundsvcClient(
        "http://svc.test", transport=httpx.MockTransport(script), sleep=sleep, **kwargs
    )


def test_async_round_trip_with_retries() -> None:
    sleeps: list[float] = []
    script = Script(
        httpx.Response(503),
        httpx.Response(201, json=PLAN_BODY),
        httpx.ConnectError("refused"),
        httpx.Response(201, json=certificate_body()),
    )

    async def go() -> tuple[Any, Any]:
        async with make(script, sleeps) as client:
            plan = await client.plan("prb_1", points={"t": 2, "x": 2})
            cert = await client.certify(
                "prb_1",
                plan,
                {"sup_abs_u_x": 1.0},
                {"interior": np.zeros(2)},
                progress=lambda a, b: None,
            )
            return plan, cert

    plan, cert = run(go())
    assert plan.plan_id == "pln_1" and cert.id == "crt_1"
    assert len(script.requests) == 4 and len(sleeps) == 2
    posted = script.requests[-1]
    assert posted.headers["idempotency-key"] == script.requests[-2].headers["idempotency-key"]
    assert json.loads(posted.content)["plan_id"] == "pln_1"


def test_async_errors_are_the_same_type() -> None:
    sleeps: list[float] = []
    script = Script(problem_json(404, "certificate_not_found", "no certificate"))

    async def go() -> None:
        async with make(script, sleeps) as client:
            await client.certificate("crt_x")

    with pytest.raises(BoundsvcClientError) as info:
        run(go())
    assert info.value.code == "certificate_not_found" and info.value.status == 404


def test_async_outage() -> None:
    sleeps: list[float] = []
    script = Script(httpx.ConnectError("refused"))

    async def go() -> None:
        async with make(script, sleeps, retries=1) as client:
            await client.health()

    with pytest.raises(ServiceUnavailable):
        run(go())
    assert len(script.requests) == 2 and len(sleeps) == 1


def test_async_listing_and_latest() -> None:
    sleeps: list[float] = []
    page = {
        "items": [
            {
                "id": "crt_9",
                "status": "valid",
                "family": "f",
                "created_at": "2025-01-01T00:00:00+00:00",
            }
        ],
        "next_cursor": None,
    }
    script = Script(
        httpx.Response(200, json=page),
        httpx.Response(200, json=page),
        httpx.Response(200, json=certificate_body("crt_9")),
    )

    async def go() -> tuple[list[str], Any]:
        async with make(script, sleeps) as client:
            ids = [s.id async for s in client.certificates(model="wave")]
            return ids, await client.latest_certificate("wave")

    ids, latest = run(go())
    assert ids == ["crt_9"] and latest is not None and latest.id == "crt_9"
