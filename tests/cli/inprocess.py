"""The real app in this process, for the synchronous client (tests of client and CLI).

``httpx.ASGITransport`` is asynchronous only, and Starlette's ``TestClient`` is deprecated in
favour of another package; :class:`SyncASGITransport` runs the ASGI app on an event loop in a
background thread and hands each request to ``httpx.ASGITransport`` there.
"""

from __future__ import annotations

import asyncio
import threading
from pathlib import Path
from typing import Any

import httpx

from boundsvc.client import BoundsvcClient, RetryPolicy

BASE_URL = "http://boundsvc.test"


class SyncASGITransport(httpx.BaseTransport):
    """A blocking transport to an ASGI app (one loop thread per transport)."""

    def __init__(self, app: Any) -> None:
        self._inner = httpx.ASGITransport(app=app)
        self._loop = asyncio.new_event_loop()
        self._thread = threading.Thread(
            target=self._loop.run_forever, daemon=True, name="asgi-loop"
        )
        self._thread.start()

    async def _handle(self, request: httpx.Request) -> httpx.Response:
        response = await self._inner.handle_async_request(request)
        body = await response.aread()
        await response.aclose()
        return httpx.Response(
            response.status_code, headers=response.headers, content=body, request=request
        )

    def handle_request(self, request: httpx.Request) -> httpx.Response:
        body = request.read()  # a sync (possibly streamed) body becomes bytes
        replay = httpx.Request(
            request.method,
            request.url,
            headers=request.headers,
            content=body,
            extensions=request.extensions,
        )
        future = asyncio.run_coroutine_threadsafe(self._handle(replay), self._loop)
        return future.result(timeout=120)

    def close(self) -> None:
        if self._loop.is_running():
            self._loop.call_soon_threadsafe(self._loop.stop)
            self._thread.join(timeout=10)
        if not self._loop.is_closed():
            self._loop.close()


def build_test_app(tmp_path: Path) -> Any:
    """``boundsvc.api.build_app`` on a fresh SQLite file."""
    from boundsvc.api import build_app
    from boundsvc.settings import Settings

    return build_app(Settings(database_url=f"sqlite:///{tmp_path / 'boundsvc.sqlite3'}"))


def client_of(app: Any, retries: int = 0) -> BoundsvcClient:
    """A client whose requests go to ``app`` in this process (close it to stop the loop)."""
    return BoundsvcClient(
        BASE_URL, transport=SyncASGITransport(app), retries=RetryPolicy(max_retries=retries)
    )
