"""Per-caller rate limit: a token bucket per API key (per client address when anonymous).

Each identity has a bucket of ``burst`` tokens refilled at ``per_minute / 60`` tokens per
second; a request takes one token, and an empty bucket is answered 429 ``rate_limited``
with ``Retry-After`` (whole seconds until a token is back).

Where the buckets live
----------------------
:class:`MemoryLimiter` keeps them in the process: with ``boundsvc serve --workers N`` (or
several replicas) each process has its own buckets, so a client spread over N processes
may get up to N times the configured rate.  :class:`RedisLimiter`
(``BOUNDSVC_RATE_LIMIT_REDIS_URL=redis://127.0.0.1:6379/0``, needs the ``redis`` package)
shares one bucket per identity between every process through an atomic Lua script; if
Redis cannot be reached the request is let through (and logged) rather than refused.
"""

from __future__ import annotations

import logging
import math
import threading
import time
from collections.abc import Callable
from typing import Any, Protocol

from starlette.types import ASGIApp, Receive, Scope, Send

from boundsvc.api.auth import PUBLIC_PATHS, client_address, send_problem
from boundsvc.settings import Settings

__all__ = ["Limiter", "MemoryLimiter", "RateLimitMiddleware", "RedisLimiter", "make_limiter"]

log = logging.getLogger("boundsvc.api.ratelimit")

#: Buckets kept before full (idle) ones are dropped, bounding memory.
_MAX_BUCKETS = 10_000


class Limiter(Protocol):
    """Takes one token for ``identity``; returns 0.0, or the seconds until one is available."""

    async def acquire(self, identity: str) -> float: ...


class MemoryLimiter:
    """Token buckets in this process's memory (thread-safe)."""

    def __init__(
        self, per_minute: int, burst: int, *, clock: Callable[[], float] = time.monotonic
    ) -> None:
        if per_minute <= 0 or burst <= 0:
            raise ValueError("per_minute and burst must be positive")
        self.rate = per_minute / 60.0
        self.burst = float(burst)
        self._clock = clock
        self._lock = threading.Lock()
        self._buckets: dict[str, tuple[float, float]] = {}

    def take(self, identity: str) -> float:
        """Synchronous :meth:`acquire`."""
        now = self._clock()
        with self._lock:
            tokens, last = self._buckets.get(identity, (self.burst, now))
            tokens = min(self.burst, tokens + (now - last) * self.rate)
            if tokens >= 1.0:
                self._buckets[identity] = (tokens - 1.0, now)
                wait = 0.0
            else:
                self._buckets[identity] = (tokens, now)
                wait = (1.0 - tokens) / self.rate
            if len(self._buckets) > _MAX_BUCKETS:
                self._prune(now)
        return wait

    def _prune(self, now: float) -> None:
        full = [
            k
            for k, (t, last) in self._buckets.items()
            if t + (now - last) * self.rate >= self.burst
        ]
        for key in full:
            del self._buckets[key]

    async def acquire(self, identity: str) -> float:
        """Take a token (no I/O, so no thread needed)."""
        return self.take(identity)


# KEYS[1] bucket; ARGV rate (tokens/s), burst.  Returns {allowed, wait in ms}.  Uses the
# server clock (TIME) so that every process sees one time line.
_BUCKET_SCRIPT = """
local now_parts = redis.call('TIME')
local now = tonumber(now_parts[1]) + tonumber(now_parts[2]) / 1000000
local rate = tonumber(ARGV[1])
local burst = tonumber(ARGV[2])
local state = redis.call('HMGET', KEYS[1], 'tokens', 'ts')
local tokens = tonumber(state[1]) or burst
local ts = tonumber(state[2]) or now
tokens = math.min(burst, tokens + math.max(0, now - ts) * rate)
local allowed = 0
local wait = 0
if tokens >= 1 then
  tokens = tokens - 1
  allowed = 1
else
  wait = math.ceil((1 - tokens) / rate * 1000)
end
redis.call('HSET', KEYS[1], 'tokens', tostring(tokens), 'ts', tostring(now))
redis.call('PEXPIRE', KEYS[1], math.ceil(burst / rate * 1000) + 1000)
return {allowed, wait}
"""


class RedisLimiter:
    """Token buckets in Redis, shared by every worker and replica."""

    def __init__(
        self, url: str, per_minute: int, burst: int, *, prefix: str = "boundsvc:ratelimit:"
    ) -> None:
        import redis.asyncio as aioredis  # optional dependency, only with a Redis URL

        self.rate = per_minute / 60.0
        self.burst = burst
        self.prefix = prefix
        self._redis: Any = aioredis.from_url(url, socket_timeout=0.5, socket_connect_timeout=0.5)
        self._script: Any = self._redis.register_script(_BUCKET_SCRIPT)

    async def acquire(self, identity: str) -> float:
        """Take a token in Redis; on a Redis failure, allow the request (logged)."""
        try:
            allowed, wait_ms = await self._script(
                keys=[self.prefix + identity], args=[self.rate, self.burst]
            )
        except Exception as exc:  # any Redis failure: fail open, the service stays usable
            log.warning("rate limiter: Redis unavailable, request allowed: %s", exc)
            return 0.0
        return 0.0 if int(allowed) == 1 else max(int(wait_ms), 1) / 1000.0


def make_limiter(settings: Settings) -> Limiter | None:
    """The limiter the settings ask for; None when ``rate_limit_per_minute <= 0``."""
    if settings.rate_limit_per_minute <= 0:
        return None
    burst = settings.rate_limit_burst or settings.rate_limit_per_minute
    if settings.rate_limit_redis_url:
        return RedisLimiter(settings.rate_limit_redis_url, settings.rate_limit_per_minute, burst)
    return MemoryLimiter(settings.rate_limit_per_minute, burst)


class RateLimitMiddleware:
    """Answer 429 ``rate_limited`` with ``Retry-After`` when the caller's bucket is empty.

    Runs after authentication: the identity is the API key id, or the client address for
    anonymous callers.  :data:`~boundsvc.api.auth.PUBLIC_PATHS` are never limited.
    """

    def __init__(self, app: ASGIApp, limiter: Limiter) -> None:
        self.app = app
        self.limiter = limiter

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or scope["path"] in PUBLIC_PATHS:
            await self.app(scope, receive, send)
            return
        caller = scope.get("state", {}).get("caller")
        key_id = getattr(caller, "key_id", None)
        identity = f"key:{key_id}" if key_id else f"ip:{client_address(scope)}"
        wait = await self.limiter.acquire(identity)
        if wait > 0:
            seconds = max(1, math.ceil(wait))
            await send_problem(
                scope,
                receive,
                send,
                429,
                "rate_limited",
                f"rate limit exceeded; retry in {seconds} s",
                title="Too many requests",
                headers={"Retry-After": str(seconds)},
            )
            return
        await self.app(scope, receive, send)
