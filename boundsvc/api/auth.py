"""Who may call: API keys with scopes, the loopback-only open mode, and key management.

Policy
------
* A request carrying ``Authorization: Bearer bsk_...`` is authenticated by
  :meth:`boundsvc.store.Store.verify_api_key`; the key's project restricts what it sees
  (:class:`~boundsvc.api.deps.Caller`).  A malformed, unknown or revoked token is a
  401 ``unauthorized`` with ``WWW-Authenticate: Bearer``, whatever the mode.
* Scopes: ``GET``/``HEAD``/``OPTIONS`` need ``read``, and so does re-verification
  (``POST /v1/certificates/{id}/verify`` recomputes and stores nothing); other methods need
  ``write``; key
  management (``/v1/keys``) and ``/metrics`` (counts over every project) need ``admin``.
  Scopes do not imply each other.  A missing scope is a 403 ``forbidden``.
* Anonymous requests are accepted (as the open project, every scope) **only** while no
  active key exists and the service is bound to a loopback address (``settings.host``),
  unless ``BOUNDSVC_ALLOW_ANONYMOUS=0`` forbids them altogether.  Otherwise they get 401,
  except for :data:`PUBLIC_PATHS` (liveness).
* Whether an active key exists is re-read from the database at most every
  :data:`KEY_PRESENCE_TTL_SECONDS`, so a key created with ``boundsvc keys create`` while
  the service runs closes the open mode within seconds, in every worker.
"""

from __future__ import annotations

import enum
import ipaddress
import logging
import re
import threading
import time
from collections.abc import Callable
from typing import Annotated, Any, Literal

from fastapi import APIRouter, Depends, Request
from pydantic import BaseModel, ConfigDict, Field
from starlette.concurrency import run_in_threadpool
from starlette.requests import cookie_parser
from starlette.responses import RedirectResponse, Response
from starlette.types import ASGIApp, Receive, Scope, Send

from boundsvc.api.deps import Caller, get_caller, get_store
from boundsvc.api.problem_details import problem_response
from boundsvc.errors import BoundsvcError, NotFound
from boundsvc.settings import Settings
from boundsvc.store import API_SCOPES, ApiKeyRecord, Store, StoreUnavailable

__all__ = [
    "LOGIN_PATHS",
    "PUBLIC_PATHS",
    "SESSION_COOKIE",
    "AuthMiddleware",
    "AuthMode",
    "Authenticator",
    "client_address",
    "is_loopback",
    "keys_router",
    "required_scope",
    "send_problem",
]

log = logging.getLogger("boundsvc.api.auth")

#: Paths answered without any credentials (liveness probes).
PUBLIC_PATHS: frozenset[str] = frozenset({"/v1/health"})
#: Path prefixes that need the ``admin`` scope.
ADMIN_PREFIXES: tuple[str, ...] = ("/v1/keys", "/metrics")
#: The dashboard's session cookie: an API key (HttpOnly, SameSite=Strict) set by the login
#: form of ``routes/dashboard.py``; honoured on read requests only, so it never authorises a write.
SESSION_COOKIE = "boundsvc_session"
#: The dashboard's sign-in routes and their stylesheet: no credentials (still rate limited).
LOGIN_PATHS: frozenset[str] = frozenset(
    {"/dashboard/login", "/dashboard/logout", "/dashboard/static/boundsvc.css"}
)
#: How long the "is there any active key?" answer is cached (seconds).
KEY_PRESENCE_TTL_SECONDS = 5.0

_READ_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
#: POSTs that only read: re-verification recomputes a certificate and stores nothing.
_READ_ONLY_POSTS = re.compile(r"/v1/certificates/[^/]+/verify")
_ALL_SCOPES = frozenset(API_SCOPES)


class AuthMode(enum.Enum):
    """How anonymous requests are treated."""

    OPEN = "open"  #: no active key, loopback bind: anonymous callers have every scope
    KEYS = "api-keys"  #: at least one active key: every request needs a key
    CLOSED = "closed"  #: no key and not loopback (or anonymous disabled): only /v1/health


def is_loopback(host: str) -> bool:
    """True if ``host`` (a bind address or name) only accepts connections from this machine."""
    if host.strip().lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def required_scope(method: str, path: str) -> str | None:
    """The scope a request needs, or None for a public path."""
    if path in PUBLIC_PATHS or path in LOGIN_PATHS:
        return None
    if any(path == p or path.startswith(p + "/") for p in ADMIN_PREFIXES):
        return "admin"
    if method.upper() in _READ_METHODS:
        return "read"
    if method.upper() == "POST" and _READ_ONLY_POSTS.fullmatch(path):
        return "read"
    return "write"


def client_address(scope: Scope) -> str:
    """The client's address as the ASGI server reports it (after proxy-header handling)."""
    client = scope.get("client")
    return str(client[0]) if client else "unknown"


class Authenticator:
    """Resolves callers from bearer tokens and decides the anonymous mode.

    Methods touch the database and are synchronous: call them from a thread.
    """

    def __init__(
        self, store: Store, settings: Settings, *, clock: Callable[[], float] = time.monotonic
    ) -> None:
        self.store = store
        self.settings = settings
        self._clock = clock
        self._lock = threading.Lock()
        self._checked_at: float | None = None
        self._keys_exist = False
        self._mode: AuthMode | None = None

    def active_key_count(self) -> int:
        """How many non-revoked keys the database holds (uncached)."""
        return sum(1 for k in self.store.list_api_keys() if k.revoked_at is None)

    def mode(self) -> AuthMode:
        """The current mode (the key presence is cached for a few seconds)."""
        now = self._clock()
        with self._lock:
            fresh = (
                self._checked_at is not None and now - self._checked_at < KEY_PRESENCE_TTL_SECONDS
            )
            if not fresh:
                self._keys_exist = self.active_key_count() > 0
                self._checked_at = now
            mode = self._mode_for(self._keys_exist)
            if mode is not self._mode and self._mode is not None:
                log.warning(
                    "authentication mode changed from %s to %s", self._mode.value, mode.value
                )
            self._mode = mode
            return mode

    def invalidate(self) -> None:
        """Forget the cached key presence (after a key was created or revoked here)."""
        with self._lock:
            self._checked_at = None

    def _mode_for(self, keys_exist: bool) -> AuthMode:
        if keys_exist:
            return AuthMode.KEYS
        if self.settings.allow_anonymous is False or not is_loopback(self.settings.host):
            return AuthMode.CLOSED
        return AuthMode.OPEN

    def describe(self) -> str:
        """One line for the start-up log: which mode, and what it means."""
        count = self.active_key_count()
        with self._lock:
            self._keys_exist, self._checked_at = count > 0, self._clock()
            self._mode = self._mode_for(count > 0)
            mode = self._mode
        if mode is AuthMode.KEYS:
            return (
                f"authentication: api-keys ({count} active key(s)); every request except "
                f"/v1/health needs Authorization: Bearer bsk_..."
            )
        if mode is AuthMode.OPEN:
            return (
                f"authentication: open (no API key configured, bound to loopback "
                f"{self.settings.host}); anonymous requests are accepted. Create a key "
                f"with `boundsvc keys create` to require keys"
            )
        why = (
            "BOUNDSVC_ALLOW_ANONYMOUS=0"
            if self.settings.allow_anonymous is False
            else f"bound to non-loopback address {self.settings.host}"
        )
        return (
            f"authentication: closed (no API key configured, {why}); every request "
            f"except /v1/health is refused with 401 until a key is created with "
            f"`boundsvc keys create`"
        )

    def verify(self, token: str) -> Caller | None:
        """The caller a bearer token authenticates, or None (malformed, unknown, revoked)."""
        record = self.store.verify_api_key(token)
        if record is None:
            return None
        return Caller(project=record.project, scopes=frozenset(record.scopes), key_id=record.id)


def _anonymous() -> Caller:
    return Caller(project=None, scopes=_ALL_SCOPES)


class AuthMiddleware:
    """Authenticate every HTTP request before its body is read.

    Sets ``request.state.caller``.  Answers 401 ``unauthorized`` (with
    ``WWW-Authenticate: Bearer``) and 403 ``forbidden`` itself.
    """

    def __init__(self, app: ASGIApp, authenticator: Authenticator) -> None:
        self.app = app
        self.authenticator = authenticator

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        needed = required_scope(scope["method"], scope["path"])
        state = scope.setdefault("state", {})
        if needed is None:
            state["caller"] = _anonymous()
            await self.app(scope, receive, send)
            return
        header = _header(scope, b"authorization")
        if header is None and scope["method"] in _READ_METHODS:
            session = _cookie(scope, SESSION_COOKIE)
            if session:
                header = f"Bearer {session}"
        caller: Caller | None
        if header is not None:
            scheme, _, token = header.partition(" ")
            if scheme.lower() != "bearer" or not token.strip():
                await _unauthorized(
                    scope, receive, send, "the Authorization header must be 'Bearer <API key>'"
                )
                return
            try:
                caller = await run_in_threadpool(self.authenticator.verify, token.strip())
            except StoreUnavailable as exc:
                await _store_down(scope, receive, send, exc)
                return
            if caller is None:
                await _unauthorized(
                    scope, receive, send, "the API key is invalid or revoked", error="invalid_token"
                )
                return
        else:
            try:
                mode = await run_in_threadpool(self.authenticator.mode)
            except StoreUnavailable as exc:
                await _store_down(scope, receive, send, exc)
                return
            if mode is not AuthMode.OPEN:
                await _unauthorized(
                    scope,
                    receive,
                    send,
                    "an API key is required: send Authorization: Bearer bsk_...",
                )
                return
            caller = _anonymous()
        state["caller"] = caller
        if needed not in caller.scopes:
            await send_problem(
                scope,
                receive,
                send,
                403,
                "forbidden",
                f"this API key lacks the {needed!r} scope "
                f"(it has {', '.join(sorted(caller.scopes))})",
                title="Forbidden",
            )
            return
        await self.app(scope, receive, send)


async def _store_down(scope: Scope, receive: Receive, send: Send, exc: StoreUnavailable) -> None:
    log.warning("cannot authenticate, store unavailable: %s", exc)
    await send_problem(
        scope,
        receive,
        send,
        503,
        "store_unavailable",
        "the database is unavailable; retry later",
        title="Service unavailable",
        headers={"Retry-After": "5"},
    )


def _cookie(scope: Scope, name: str) -> str | None:
    raw = _header(scope, b"cookie")
    return cookie_parser(raw).get(name) if raw else None


def _header(scope: Scope, name: bytes) -> str | None:
    for key, value in scope.get("headers", []):
        if key == name:
            return bytes(value).decode("latin-1")
    return None


async def send_problem(
    scope: Scope,
    receive: Receive,
    send: Send,
    status: int,
    code: str,
    detail: str,
    *,
    title: str | None = None,
    headers: dict[str, str] | None = None,
) -> None:
    """Answer a raw ASGI request with a problem+json body (for the middlewares)."""
    response = problem_response(
        Request(scope, receive), status, code, detail, title=title, headers=headers
    )
    await response(scope, receive, send)


async def _unauthorized(
    scope: Scope, receive: Receive, send: Send, detail: str, *, error: str | None = None
) -> None:
    if scope["method"] in _READ_METHODS and scope["path"].startswith("/dashboard"):
        # a browser on a dashboard page: to the login form (dropping a stale session cookie)
        response = RedirectResponse("/dashboard/login", status_code=303)
        response.delete_cookie(SESSION_COOKIE, path="/", httponly=True, samesite="strict")
        await response(scope, receive, send)
        return
    challenge = 'Bearer realm="boundsvc"' + (f', error="{error}"' if error else "")
    await send_problem(
        scope,
        receive,
        send,
        401,
        "unauthorized",
        detail,
        title="Unauthorized",
        headers={"WWW-Authenticate": challenge},
    )


# ---------------------------------------------------------------------- key management

keys_router = APIRouter(prefix="/v1", tags=["keys"])

StoreDep = Annotated[Store, Depends(get_store)]
CallerDep = Annotated[Caller, Depends(get_caller)]


class KeyCreate(BaseModel):
    """Body of ``POST /v1/keys``."""

    model_config = ConfigDict(extra="forbid")

    name: str = Field(min_length=1, max_length=200)
    scopes: list[Literal["read", "write", "admin"]] = Field(min_length=1)
    project: str | None = Field(
        default=None,
        min_length=1,
        max_length=128,
        description="defaults to the caller's project; an admin key manages only its own",
    )


def _key_json(record: ApiKeyRecord) -> dict[str, Any]:
    return {
        "key_id": record.id,
        "project": record.project,
        "name": record.name,
        "scopes": list(record.scopes),
        "created_at": record.created_at.isoformat(),
        "revoked_at": record.revoked_at.isoformat() if record.revoked_at else None,
        "last_used_at": record.last_used_at.isoformat() if record.last_used_at else None,
    }


@keys_router.get("/keys")
def list_keys(store: StoreDep, caller: CallerDep) -> dict[str, Any]:
    """The caller's project's keys (all projects in open mode), revoked ones included."""
    return {"items": [_key_json(k) for k in store.list_api_keys(caller.project)]}


@keys_router.post("/keys", status_code=201)
def create_key(
    body: KeyCreate, request: Request, store: StoreDep, caller: CallerDep
) -> dict[str, Any]:
    """Create a key; the response carries the token, which is never shown again.

    A project other than the admin key's own is a 403 ``forbidden``.
    """
    project = body.project or caller.write_project
    if caller.project is not None and project != caller.project:
        err = BoundsvcError(
            "forbidden",
            f"an admin key of project {caller.project!r} cannot "
            f"create keys for project {project!r}",
            "project",
        )
        err.status, err.title = 403, "Forbidden"
        raise err
    key_id, token = store.create_api_key(project, body.name, sorted(set(body.scopes)))
    request.app.state.authenticator.invalidate()
    log.info(
        "API key %s created for project %s by %s", key_id, project, caller.key_id or "anonymous"
    )
    return {
        "key_id": key_id,
        "token": token,
        "project": project,
        "name": body.name,
        "scopes": sorted(set(body.scopes)),
    }


@keys_router.delete("/keys/{key_id}", status_code=204)
def revoke_key(key_id: str, request: Request, store: StoreDep, caller: CallerDep) -> Response:
    """Revoke a key of the caller's project (404 ``api_key_not_found`` otherwise)."""
    visible = {k.id for k in store.list_api_keys(caller.project) if k.revoked_at is None}
    if key_id not in visible or not store.revoke_api_key(key_id):
        raise NotFound("api_key_not_found", f"no active API key with id {key_id!r}", "key_id")
    request.app.state.authenticator.invalidate()
    log.info("API key %s revoked by %s", key_id, caller.key_id or "anonymous")
    return Response(status_code=204)
