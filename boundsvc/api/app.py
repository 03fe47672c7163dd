"""The FastAPI application factory: tests, ``boundsvc serve`` and Docker all call it."""

from __future__ import annotations

import logging

from fastapi import FastAPI, Request
from starlette.responses import Response
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from boundsvc import __version__
from boundsvc import certify as certify_module
from boundsvc.api.auth import Authenticator, AuthMiddleware, keys_router
from boundsvc.api.idempotency import IdempotencyMiddleware
from boundsvc.api.logs import RequestLogMiddleware, configure_logging
from boundsvc.api.metrics import Metrics, metrics_router
from boundsvc.api.openapi import install_openapi
from boundsvc.api.problem_details import install_error_handlers, problem_response
from boundsvc.api.ratelimit import RateLimitMiddleware, make_limiter
from boundsvc.api.routes import certificates, dashboard, meta, plans, problems, reports, studies
from boundsvc.settings import Settings, get_settings
from boundsvc.store import SchemaOutOfDate, Store, StoreUnavailable, open_store

log = logging.getLogger("boundsvc.api")


class BodyLimit:
    """Refuse bodies over ``limit`` bytes with 413 ``body_too_large``: from Content-Length
    before reading, else while streaming (Starlette itself does not limit request bodies).

    When a streamed body crosses the limit the 413 is sent at once and the app is told the
    client disconnected; whatever the app answers after that is dropped.  (Raising through
    FastAPI instead would turn into a 400 "error parsing the body".)
    """

    def __init__(self, app: ASGIApp, limit: int) -> None:
        self.app = app
        self.limit = limit

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        for name, value in scope.get("headers", []):
            if name == b"content-length":
                try:
                    declared = int(value)
                except ValueError:
                    declared = 0
                if declared > self.limit:
                    await _too_large(scope, receive, send, self.limit)
                    return
        seen = 0
        tripped = False
        started = False

        async def limited() -> Message:
            nonlocal seen, tripped
            if tripped:
                return {"type": "http.disconnect"}
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.limit:
                    tripped = True
                    if not started:
                        await _too_large(scope, receive, send, self.limit)
                    return {"type": "http.disconnect"}
            return message

        async def guarded_send(message: Message) -> None:
            nonlocal started
            if tripped:
                return
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        await self.app(scope, limited, guarded_send)


async def _too_large(scope: Scope, receive: Receive, send: Send, limit: int) -> None:
    request = Request(scope, receive)
    response = problem_response(
        request, 413, "body_too_large", f"the request body exceeds the maximum of {limit} bytes"
    )
    await response(scope, receive, send)


def _open_checked(settings: Settings, store: Store | None) -> Store:
    """The store, its schema checked: behind/missing raises ``SchemaOutOfDate`` (logged with
    the exact ``boundsvc db upgrade --database-url ...`` command)."""
    try:
        if store is None:
            return open_store(settings.database_url)
        status = store.schema_status()
        if not status.up_to_date:
            raise SchemaOutOfDate(status.message, command=status.command)
        return store
    except SchemaOutOfDate as exc:
        log.error("database schema not usable: %s", exc, extra={"action": exc.command})
        raise


def install_store_error_handlers(app: FastAPI) -> None:
    """``StoreUnavailable`` -> 503 ``store_unavailable`` (``Retry-After: 5``) and
    ``SchemaOutOfDate`` -> 503 ``schema_out_of_date``; other store errors stay 500s."""

    @app.exception_handler(StoreUnavailable)
    async def _store_down(request: Request, exc: StoreUnavailable) -> Response:
        log.warning("store unavailable: %s", exc)
        return problem_response(
            request,
            503,
            "store_unavailable",
            "the database is unavailable; retry later",
            headers={"Retry-After": "5"},
        )

    @app.exception_handler(SchemaOutOfDate)
    async def _schema_behind(request: Request, exc: SchemaOutOfDate) -> Response:
        log.error("database schema not usable: %s", exc, extra={"action": exc.command})
        return problem_response(
            request,
            503,
            "schema_out_of_date",
            "the database schema is not current; the operator must run boundsvc db upgrade",
        )


def build_app(settings: Settings | None = None, store: Store | None = None) -> FastAPI:
    """Build the service. ``store`` defaults to ``open_store(settings.database_url)``.

    Raises ``SchemaOutOfDate`` (naming the upgrade command) when the schema is not at head.
    Middlewares, outermost first: request log/metrics, body limit, authentication, rate
    limit, idempotency.
    """
    settings = settings or get_settings()
    configure_logging(settings.log_level)
    store = _open_checked(settings, store)
    app = FastAPI(
        title="boundsvc",
        version=__version__,
        description="Certificates of error bounds for neural-network PDE surrogates.",
        docs_url="/docs",
        redoc_url=None,
    )
    app.state.settings = settings
    app.state.store = store
    # derivations that miss the cache are dry-run in a worker process under this budget
    certify_module.SYMBOLIC_BUDGET_SECONDS = settings.symbolic_budget_seconds
    app.state.metrics = Metrics(store)
    authenticator = Authenticator(store, settings)
    app.state.authenticator = authenticator
    install_error_handlers(app)
    install_store_error_handlers(app)
    install_openapi(app)  # errors documented as problem+json

    for router in (
        meta.router,
        problems.router,
        plans.router,
        certificates.router,
        reports.router,
        studies.router,
        dashboard.router,
        keys_router,
        metrics_router,
    ):
        app.include_router(router)
    app.add_middleware(
        IdempotencyMiddleware, store=store, stale_after_seconds=settings.idempotency_stale_seconds
    )
    limiter = make_limiter(settings)
    if limiter is not None:
        app.add_middleware(RateLimitMiddleware, limiter=limiter)
    app.add_middleware(AuthMiddleware, authenticator=authenticator)
    app.add_middleware(BodyLimit, limit=settings.max_body_bytes)
    app.add_middleware(RequestLogMiddleware, metrics=app.state.metrics)
    log.info(authenticator.describe())
    return app
