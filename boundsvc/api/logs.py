"""Structured JSON logs and the request id.

Every log record of the ``boundsvc`` loggers is one JSON object per line on stderr.  Each
HTTP request adds one ``boundsvc.access`` line::

    {"ts": "...", "level": "info", "logger": "boundsvc.access", "message": "request",
     "request_id": "3f2a...", "method": "POST", "route": "/v1/certificates",
     "status": 201, "duration_ms": 41.7, "project": "lab-a", "key_id": "9c1e...",
     "client": "127.0.0.1"}

The request id is the client's ``X-Request-ID`` when it is a short alphanumeric string
(else a fresh one); it is sent back as ``X-Request-ID`` and is the ``request_id`` of every
error body, so a client's report can be matched to the log line.
"""

from __future__ import annotations

import datetime as dt
import json
import logging
import re
import sys
import time
import uuid
from typing import Any, TextIO

from starlette.datastructures import MutableHeaders
from starlette.routing import Route, compile_path
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from boundsvc.api.auth import client_address
from boundsvc.api.metrics import Metrics

__all__ = ["JsonFormatter", "RequestLogMiddleware", "configure_logging", "route_template"]

access_log = logging.getLogger("boundsvc.access")
log = logging.getLogger("boundsvc.api.logs")

# Attributes every LogRecord has; anything else came in through ``extra=``.
_STANDARD = frozenset(logging.LogRecord("", 0, "", 0, "", None, None).__dict__) | {
    "message",
    "asctime",
    "taskName",
}


class JsonFormatter(logging.Formatter):
    """One JSON object per record: time, level, logger, message and the ``extra`` fields."""

    def format(self, record: logging.LogRecord) -> str:
        """Render ``record`` as a single line of JSON."""
        entry: dict[str, Any] = {
            "ts": dt.datetime.fromtimestamp(record.created, dt.UTC).isoformat(
                timespec="milliseconds"
            ),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        for key, value in record.__dict__.items():
            if key not in _STANDARD and not key.startswith("_"):
                entry[key] = value
        if record.exc_info:
            entry["exception"] = self.formatException(record.exc_info)
        return json.dumps(entry, default=str, ensure_ascii=False)


class _StderrHandler(logging.StreamHandler[TextIO]):
    """Writes to whatever ``sys.stderr`` is at emit time (test capture swaps it)."""

    def __init__(self) -> None:
        super().__init__(sys.stderr)

    @property
    def stream(self) -> TextIO:
        return sys.stderr

    @stream.setter
    def stream(self, _value: TextIO) -> None:
        pass


def configure_logging(level: str = "info") -> None:
    """Send the ``boundsvc`` loggers to stderr as JSON lines (idempotent)."""
    logger = logging.getLogger("boundsvc")
    logger.setLevel(level.upper())
    if not any(isinstance(h, _StderrHandler) for h in logger.handlers):
        handler = _StderrHandler()
        handler.setFormatter(JsonFormatter())
        logger.addHandler(handler)


def _request_id(scope: Scope) -> str:
    for name, value in scope.get("headers", []):
        if name == b"x-request-id":
            rid = bytes(value).decode("latin-1")
            if 0 < len(rid) <= 100 and rid.replace("-", "").isalnum() and rid.isascii():
                return rid
            break
    return uuid.uuid4().hex


def route_template(scope: Scope) -> str:
    """The route's path template, or ``unmatched`` (keeps metric labels bounded).

    Requests answered before routing (401, 403, 429, idempotent replays) have no matched
    route in the scope; their path is matched against the app's templates instead.
    """
    path = getattr(scope.get("route"), "path", None)
    if path:
        return str(path)
    for pattern, template in _templates(scope.get("app")):
        if pattern.match(scope.get("path", "")):
            return template
    return "unmatched"


def _templates(app: Any) -> list[tuple[re.Pattern[str], str]]:
    if app is None:
        return []
    cached: list[tuple[re.Pattern[str], str]] | None = getattr(app.state, "route_templates", None)
    if cached is None:
        try:
            paths = list(app.openapi().get("paths", {}))
        except Exception:  # a schema bug must not break request logging
            log.exception("cannot list the route templates")
            paths = []
        paths += [r.path for r in app.routes if isinstance(r, Route)]
        cached = [(compile_path(p)[0], p) for p in dict.fromkeys(paths)]
        app.state.route_templates = cached
    return cached


class RequestLogMiddleware:
    """Outermost middleware: request id, one access log line, request metrics.

    It never answers itself; an exception escaping the app is recorded as status 500 and
    re-raised for the 500 handler (which puts the same request id in the body).
    """

    def __init__(self, app: ASGIApp, metrics: Metrics) -> None:
        self.app = app
        self.metrics = metrics

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        rid = _request_id(scope)
        state = scope.setdefault("state", {})
        state["request_id"] = rid
        started = time.perf_counter()
        status = 500

        async def send_with_id(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = int(message["status"])
                headers = MutableHeaders(scope=message)
                if "x-request-id" not in headers:
                    headers.append("X-Request-ID", rid)
            await send(message)

        try:
            await self.app(scope, receive, send_with_id)
        finally:
            seconds = time.perf_counter() - started
            route = route_template(scope)
            self.metrics.observe(scope["method"], route, status, seconds)
            caller = state.get("caller")
            access_log.info(
                "request",
                extra={
                    "request_id": rid,
                    "method": scope["method"],
                    "route": route,
                    "path": scope["path"],
                    "status": status,
                    "duration_ms": round(seconds * 1000.0, 3),
                    "project": getattr(caller, "project", None),
                    "key_id": getattr(caller, "key_id", None),
                    "client": client_address(scope),
                },
            )
