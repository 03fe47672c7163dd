"""``Idempotency-Key`` on POSTs: a retried request gets the first response, not a second effect.

The middleware buffers the body (inside :class:`~boundsvc.api.app.BodyLimit`, so the size
limit still applies), hashes it, and claims ``(project, key)`` in the store, whose
``UNIQUE (project, key)`` constraint picks exactly one winner across every worker and host
sharing the database:

=========================  ==============================================================
store outcome              response
=========================  ==============================================================
``Started``                the request runs; a response below 500 is recorded, a 5xx or an
                           exception abandons the claim so that a retry can run
``Replay``                 the recorded status and body, with ``Idempotent-Replayed: true``
``Mismatch``               422 ``idempotency_mismatch`` (same key, different request)
``InProgress``             409 ``idempotency_in_progress`` with ``Retry-After: 1``
=========================  ==============================================================

The request hash is the SHA-256 of ``"<METHOD> <path>\\n"`` followed by the raw body bytes
(the path is included so a key reused on another endpoint is a mismatch, not a replay of
an unrelated response).  Keys are per project (the API key's project, or the open project).
A claim whose process died is taken over after ``BOUNDSVC_IDEMPOTENCY_STALE_SECONDS``.
"""

from __future__ import annotations

import hashlib
import logging
from datetime import timedelta

import anyio
from starlette.concurrency import run_in_threadpool
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from boundsvc.api.auth import send_problem
from boundsvc.api.deps import OPEN_PROJECT
from boundsvc.store import InProgress, Mismatch, Replay, Store, StoreUnavailable

__all__ = ["IDEMPOTENT_PATHS", "MAX_KEY_LENGTH", "IdempotencyMiddleware", "request_digest"]

log = logging.getLogger("boundsvc.api.idempotency")

#: POST routes that honour ``Idempotency-Key``.
IDEMPOTENT_PATHS: frozenset[str] = frozenset(
    {"/v1/certificates", "/v1/certificates/upload", "/v1/plans", "/v1/problems", "/v1/studies"}
)
MAX_KEY_LENGTH = 256
_JSON = b"application/json"
_PROBLEM_JSON = b"application/problem+json"


def request_digest(method: str, path: str, body: bytes) -> str:
    """The hash that decides whether a retried request is the same request."""
    digest = hashlib.sha256(f"{method.upper()} {path}\n".encode())
    digest.update(body)
    return digest.hexdigest()


def _valid_key(key: str) -> bool:
    return 0 < len(key) <= MAX_KEY_LENGTH and all(" " <= ch <= "~" for ch in key)


class IdempotencyMiddleware:
    """Replay, refuse or run POSTs that carry an ``Idempotency-Key`` header.

    Answers 400 ``idempotency_key_invalid``, 409 ``idempotency_in_progress``, 422
    ``idempotency_mismatch`` and (store down) 503 ``store_unavailable`` itself.
    """

    def __init__(
        self,
        app: ASGIApp,
        store: Store,
        *,
        stale_after_seconds: float = 600.0,
        paths: frozenset[str] = IDEMPOTENT_PATHS,
    ) -> None:
        self.app = app
        self.store = store
        self.stale_after = timedelta(seconds=stale_after_seconds)
        self.paths = paths

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        key = self._key(scope)
        if key is None:
            await self.app(scope, receive, send)
            return
        if not _valid_key(key):
            await send_problem(
                scope,
                receive,
                send,
                400,
                "idempotency_key_invalid",
                f"Idempotency-Key must be 1 to {MAX_KEY_LENGTH} printable ASCII characters",
                title="Bad request",
            )
            return
        body = await _read_body(receive)
        if body is None:  # the client went away before sending its body
            return
        caller = scope.get("state", {}).get("caller")
        project = getattr(caller, "write_project", OPEN_PROJECT)
        digest = request_digest(scope["method"], scope["path"], body)
        try:
            outcome = await run_in_threadpool(
                self.store.begin_idempotent, project, key, digest, stale_after=self.stale_after
            )
        except StoreUnavailable as exc:
            await send_problem(
                scope,
                receive,
                send,
                503,
                "store_unavailable",
                str(exc),
                title="Service unavailable",
            )
            return
        if isinstance(outcome, Replay):
            await _replay(send, outcome)
        elif isinstance(outcome, Mismatch):
            await send_problem(
                scope,
                receive,
                send,
                422,
                "idempotency_mismatch",
                "this Idempotency-Key was already used with a different "
                "request; use a new key for a new request",
                title="Unprocessable request",
            )
        elif isinstance(outcome, InProgress):
            await send_problem(
                scope,
                receive,
                send,
                409,
                "idempotency_in_progress",
                "a request with this Idempotency-Key is still running",
                title="Conflict",
                headers={"Retry-After": "1"},
            )
        else:
            await self._run(scope, receive, send, body, project, key)

    def _key(self, scope: Scope) -> str | None:
        if scope["type"] != "http" or scope["method"] != "POST" or scope["path"] not in self.paths:
            return None
        for name, value in scope.get("headers", []):
            if name == b"idempotency-key":
                return bytes(value).decode("latin-1").strip()
        return None

    async def _run(
        self, scope: Scope, receive: Receive, send: Send, body: bytes, project: str, key: str
    ) -> None:
        delivered = False

        async def replay_receive() -> Message:
            nonlocal delivered
            if not delivered:
                delivered = True
                return {"type": "http.request", "body": body, "more_body": False}
            return await receive()

        status: int | None = None
        chunks: list[bytes] = []

        async def capture_send(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = int(message["status"])
            elif message["type"] == "http.response.body":
                chunks.append(bytes(message.get("body", b"")))
            await send(message)

        try:
            await self.app(scope, replay_receive, capture_send)
        except BaseException:
            with anyio.CancelScope(shield=True):
                await self._abandon(project, key)
            raise
        if status is None or status >= 500:
            with anyio.CancelScope(shield=True):
                await self._abandon(project, key)
            return
        try:
            await run_in_threadpool(
                self.store.finish_idempotent, project, key, status, b"".join(chunks)
            )
        except Exception:  # the response was sent already: free the key for a retry instead
            log.exception("could not record the idempotent response of key %r", key)
            await self._abandon(project, key)

    async def _abandon(self, project: str, key: str) -> None:
        try:
            await run_in_threadpool(self.store.abandon_idempotent, project, key)
        except Exception:  # retries then wait for the stale takeover
            log.exception("could not abandon idempotency key %r", key)


async def _read_body(receive: Receive) -> bytes | None:
    parts: list[bytes] = []
    while True:
        message = await receive()
        if message["type"] == "http.disconnect":
            return None
        parts.append(bytes(message.get("body", b"")))
        if not message.get("more_body", False):
            return b"".join(parts)


async def _replay(send: Send, outcome: Replay) -> None:
    media = _PROBLEM_JSON if outcome.status >= 400 else _JSON
    await send(
        {
            "type": "http.response.start",
            "status": outcome.status,
            "headers": [
                (b"content-type", media),
                (b"content-length", str(len(outcome.body)).encode()),
                (b"idempotent-replayed", b"true"),
            ],
        }
    )
    await send({"type": "http.response.body", "body": outcome.body, "more_body": False})
