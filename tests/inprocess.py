"""A synchronous in-process client of an ASGI app (httpx ``ASGITransport``), shared by tests.

Starlette's own TestClient warns about httpx; this is the same idea in a few lines: an event
loop in a helper thread (an anyio blocking portal) runs httpx's async client.
"""

from __future__ import annotations

from collections.abc import AsyncIterator, Iterable
from contextlib import ExitStack
from typing import Any

import httpx
from anyio.from_thread import BlockingPortal, start_blocking_portal


class InProcessClient:
    """``client.get(...)``, ``client.post(...)`` against an ASGI app, no network."""

    __test__ = False

    def __init__(self, app: Any, *, raise_server_exceptions: bool = True) -> None:
        self.app = app
        self._stack = ExitStack()
        self._portal: BlockingPortal = self._stack.enter_context(start_blocking_portal())
        transport = httpx.ASGITransport(
            app=app, raise_app_exceptions=raise_server_exceptions, client=("127.0.0.1", 50000)
        )
        self._client = httpx.AsyncClient(transport=transport, base_url="http://testserver")

    def request(
        self, method: str, url: str, *, content: Any = None, **kwargs: Any
    ) -> httpx.Response:
        """Send one request; a sync iterator ``content`` is streamed (chunked)."""
        if (
            content is not None
            and not isinstance(content, bytes | str)
            and isinstance(content, Iterable)
        ):
            chunks = list(content)

            async def stream() -> AsyncIterator[bytes]:
                for chunk in chunks:
                    yield chunk

            content = stream()
        return self._portal.call(
            lambda: self._client.request(method, url, content=content, **kwargs)
        )

    def get(self, url: str, **kwargs: Any) -> httpx.Response:
        return self.request("GET", url, **kwargs)

    def post(self, url: str, **kwargs: Any) -> httpx.Response:
        return self.request("POST", url, **kwargs)

    def delete(self, url: str, **kwargs: Any) -> httpx.Response:
        return self.request("DELETE", url, **kwargs)

    def close(self) -> None:
        self._portal.call(self._client.aclose)
        self._stack.close()
