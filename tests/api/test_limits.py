"""Body size limit and rate limit."""

from __future__ import annotations

import asyncio
import os
import secrets
from collections.abc import Iterator

import pytest
from starlette.types import Message

from boundsvc.api.app import BodyLimit
from boundsvc.api.ratelimit import MemoryLimiter, RedisLimiter
from tests.api.conftest import ApiFactory

PROBLEM = {"problem": {"equation": "u_t = u_xx", "space": {"x": [0, 1]}, "time": [0, 1]}}


def test_content_length_over_the_limit_is_413(api: ApiFactory) -> None:
    client = api(max_body_bytes=100)
    response = client.post(
        "/v1/problems",
        content=b"{" + b" " * 200 + b"}",
        headers={"Content-Type": "application/json"},
    )
    assert response.status_code == 413
    assert response.headers["content-type"] == "application/problem+json"
    body = response.json()
    assert body["code"] == "body_too_large" and "100 bytes" in body["detail"]
    assert body["request_id"] == response.headers["x-request-id"]


def test_content_length_is_refused_before_the_body_is_read() -> None:
    async def app(scope: object, receive: object, send: object) -> None:
        raise AssertionError("the app must not run")

    async def receive() -> Message:
        raise AssertionError("the body must not be read")

    sent: list[Message] = []

    async def send(message: Message) -> None:
        sent.append(message)

    scope = {
        "type": "http",
        "method": "POST",
        "path": "/v1/problems",
        "headers": [(b"content-length", b"1000001")],
        "query_string": b"",
        "root_path": "",
        "scheme": "http",
        "server": ("127.0.0.1", 8000),
    }
    asyncio.run(BodyLimit(app, limit=1_000_000)(scope, receive, send))
    assert sent[0]["status"] == 413


def test_a_chunked_body_over_the_limit_is_413(api: ApiFactory) -> None:
    client = api(max_body_bytes=1000)

    def chunks() -> Iterator[bytes]:
        yield b'{"problem": {"equation": "'
        for _ in range(100):
            yield b"u" * 50

    response = client.post(
        "/v1/problems", content=chunks(), headers={"Content-Type": "application/json"}
    )
    assert "content-length" not in response.request.headers
    assert response.status_code == 413, response.text
    assert response.json()["code"] == "body_too_large"


def test_a_body_under_the_limit_passes(api: ApiFactory) -> None:
    client = api(max_body_bytes=1000)
    assert client.post("/v1/problems", json=PROBLEM).status_code == 200


def test_memory_bucket_refills_at_the_configured_rate() -> None:
    now = [100.0]
    limiter = MemoryLimiter(per_minute=60, burst=2, clock=lambda: now[0])
    assert limiter.take("a") == 0.0
    assert limiter.take("a") == 0.0
    assert limiter.take("a") == pytest.approx(1.0)
    assert limiter.take("b") == 0.0  # buckets are per identity
    now[0] += 0.5
    assert limiter.take("a") == pytest.approx(0.5)
    now[0] += 0.5
    assert limiter.take("a") == 0.0
    now[0] += 1000.0  # refill caps at the burst
    assert [limiter.take("a") for _ in range(3)][-1] > 0


def test_rate_limit_per_key_answers_429_with_retry_after(api: ApiFactory) -> None:
    key_a = api.key("lab-a", "read")
    key_b = api.key("lab-b", "read")
    client = api(rate_limit_per_minute=6, rate_limit_burst=2)
    assert [client.get("/v1/certificates", headers=key_a).status_code for _ in range(2)] == [
        200,
        200,
    ]
    limited = client.get("/v1/certificates", headers=key_a)
    assert limited.status_code == 429
    assert limited.json()["code"] == "rate_limited"
    assert 1 <= int(limited.headers["retry-after"]) <= 10
    assert client.get("/v1/certificates", headers=key_b).status_code == 200
    assert client.get("/v1/health").status_code == 200  # probes are never limited


def test_anonymous_callers_are_limited_by_address(api: ApiFactory) -> None:
    client = api(rate_limit_per_minute=60, rate_limit_burst=1)
    assert client.get("/v1/families").status_code == 200
    assert client.get("/v1/families").status_code == 429


def test_rate_limit_zero_disables_it(api: ApiFactory) -> None:
    client = api(rate_limit_per_minute=0)
    assert all(client.get("/v1/families").status_code == 200 for _ in range(5))


REDIS_URL = os.environ.get("BOUNDSVC_TEST_REDIS_URL", "redis://127.0.0.1:6379/15")


def test_redis_buckets_are_shared_between_processes() -> None:
    redis = pytest.importorskip("redis")
    try:
        redis.Redis.from_url(REDIS_URL, socket_connect_timeout=0.5).ping()
    except redis.RedisError as exc:
        pytest.skip(f"Redis unreachable at {REDIS_URL}: {exc}")
    prefix = f"boundsvc-test-{secrets.token_hex(4)}:"

    async def scenario() -> list[float]:
        one = RedisLimiter(REDIS_URL, per_minute=60, burst=2, prefix=prefix)
        two = RedisLimiter(REDIS_URL, per_minute=60, burst=2, prefix=prefix)
        waits = [
            await one.acquire("k"),
            await two.acquire("k"),
            await one.acquire("k"),
            await two.acquire("other"),
        ]
        await one._redis.aclose()
        await two._redis.aclose()
        return waits

    waits = asyncio.run(scenario())
    assert waits[0] == 0.0 and waits[1] == 0.0
    assert 0.0 < waits[2] <= 1.0
    assert waits[3] == 0.0


def test_redis_down_fails_open() -> None:
    pytest.importorskip("redis")

    async def scenario() -> float:
        limiter = RedisLimiter("redis://127.0.0.1:1/0", per_minute=60, burst=1)
        wait = await limiter.acquire("k")
        await limiter._redis.aclose()
        return wait

    assert asyncio.run(scenario()) == 0.0
