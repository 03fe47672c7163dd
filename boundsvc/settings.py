"""Deployment settings, from environment variables with the prefix ``BOUNDSVC_``.

One settings object, read through a cached getter that tests and the CLI override; nothing reads
the environment at import time.
"""

from __future__ import annotations

import functools
import os
from collections.abc import Mapping
from dataclasses import dataclass, field, replace

DEFAULT_DATABASE_URL = "sqlite:///./boundsvc.sqlite3"


def _int(env: Mapping[str, str], name: str, default: int) -> int:
    raw = env.get(name)
    if raw is None or raw == "":
        return default
    try:
        return int(raw)
    except ValueError as exc:
        raise ValueError(f"{name} must be an integer, got {raw!r}") from exc


def _float(env: Mapping[str, str], name: str, default: float) -> float:
    raw = env.get(name)
    if raw is None or raw == "":
        return default
    try:
        return float(raw)
    except ValueError as exc:
        raise ValueError(f"{name} must be a number, got {raw!r}") from exc


def _bool(env: Mapping[str, str], name: str, default: bool) -> bool:
    raw = env.get(name)
    if raw is None or raw == "":
        return default
    return raw.strip().lower() in {"1", "true", "yes", "on"}


@dataclass(frozen=True)
class Settings:
    """Everything a deployment can set (see docs/deployment.md for each variable)."""

    database_url: str = DEFAULT_DATABASE_URL
    host: str = "127.0.0.1"
    port: int = 8000
    max_body_bytes: int = 256 * 1024 * 1024
    symbolic_budget_seconds: float = 10.0
    archive_residuals: bool = False
    rate_limit_per_minute: int = 600
    rate_limit_burst: int | None = None
    rate_limit_redis_url: str | None = None
    idempotency_stale_seconds: float = 600.0
    log_level: str = "info"
    allow_anonymous: bool | None = None
    extra: Mapping[str, str] = field(default_factory=dict)

    @classmethod
    def from_env(cls, env: Mapping[str, str] | None = None) -> Settings:
        env = os.environ if env is None else env
        anonymous = env.get("BOUNDSVC_ALLOW_ANONYMOUS")
        return cls(
            database_url=env.get("BOUNDSVC_DATABASE_URL") or DEFAULT_DATABASE_URL,
            host=env.get("BOUNDSVC_HOST") or "127.0.0.1",
            port=_int(env, "BOUNDSVC_PORT", 8000),
            max_body_bytes=_int(env, "BOUNDSVC_MAX_BODY_BYTES", 256 * 1024 * 1024),
            symbolic_budget_seconds=_float(env, "BOUNDSVC_SYMBOLIC_BUDGET_SECONDS", 10.0),
            archive_residuals=_bool(env, "BOUNDSVC_ARCHIVE_RESIDUALS", False),
            rate_limit_per_minute=_int(env, "BOUNDSVC_RATE_LIMIT_PER_MINUTE", 600),
            rate_limit_burst=_int(env, "BOUNDSVC_RATE_LIMIT_BURST", 0) or None,
            rate_limit_redis_url=env.get("BOUNDSVC_RATE_LIMIT_REDIS_URL") or None,
            idempotency_stale_seconds=_float(env, "BOUNDSVC_IDEMPOTENCY_STALE_SECONDS", 600.0),
            log_level=env.get("BOUNDSVC_LOG_LEVEL") or "info",
            allow_anonymous=None
            if anonymous in (None, "")
            else _bool(env, "BOUNDSVC_ALLOW_ANONYMOUS", False),
        )

    def with_overrides(self, **changes: object) -> Settings:
        return replace(self, **changes)  # type: ignore[arg-type]


@functools.lru_cache(maxsize=1)
def get_settings() -> Settings:
    """The process's settings (cached; tests call ``get_settings.cache_clear()``)."""
    return Settings.from_env()
