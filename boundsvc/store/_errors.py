"""Exceptions raised by :mod:`boundsvc.store`.

Every error the store raises derives from :class:`StoreError`; SQLAlchemy and DBAPI
exceptions never cross the package boundary (they are chained with ``raise ... from``).
Each docstring names the HTTP status the API layer should map the error to.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from sqlalchemy import exc as sa_exc

__all__ = [
    "ArchiveCorrupt",
    "CertificateConflict",
    "ContentConflict",
    "InvalidCursor",
    "SchemaOutOfDate",
    "StoreError",
    "StoreUnavailable",
    "UnknownReference",
    "short_reason",
    "translate_errors",
]


class StoreError(Exception):
    """Base class of every store error.  Unclassified failures map to HTTP 500."""


class ContentConflict(StoreError):
    """An immutable row already exists under this id with different content (HTTP 409)."""

    def __init__(self, kind: str, row_id: str) -> None:
        self.kind = kind
        self.row_id = row_id
        super().__init__(f"{kind} {row_id!r} already exists with different content")


class CertificateConflict(ContentConflict):
    """A certificate id is already stored with a different document (HTTP 409)."""

    def __init__(self, row_id: str) -> None:
        super().__init__("certificate", row_id)


class UnknownReference(StoreError):
    """A row refers to a problem, plan or certificate that is not stored (HTTP 422)."""


class InvalidCursor(StoreError):
    """A pagination cursor is malformed or was not produced by this store (HTTP 400)."""


class SchemaOutOfDate(StoreError):
    """The database schema is missing, behind or ahead of this code (HTTP 503).

    ``command`` holds the exact shell command that brings the schema up to date.
    """

    def __init__(self, message: str, *, command: str) -> None:
        self.command = command
        super().__init__(message)


class StoreUnavailable(StoreError):
    """The database cannot be reached, is locked or timed out (HTTP 503)."""


class ArchiveCorrupt(StoreError):
    """A stored residual archive fails its SHA-256 or cannot be decoded (HTTP 409,
    code ``archive_corrupt``: the certificate cannot be re-verified)."""


@contextmanager
def translate_errors(*, allow_integrity: bool = False) -> Iterator[None]:
    """Translate SQLAlchemy exceptions escaping the block into :class:`StoreError`.

    Connection failures, lock timeouts and pool exhaustion become
    :class:`StoreUnavailable`; any other SQLAlchemy error becomes a plain
    :class:`StoreError`.  ``IntegrityError`` must be handled by the caller before it
    reaches this boundary: with ``allow_integrity`` it passes through unchanged (for
    internal callers that settle uniqueness races), otherwise it becomes a ``StoreError``.
    """
    try:
        yield
    except StoreError:
        raise
    except sa_exc.IntegrityError as exc:
        if allow_integrity:
            raise
        raise StoreError(f"integrity error: {short_reason(exc)}") from exc
    except (sa_exc.OperationalError, sa_exc.InterfaceError, sa_exc.TimeoutError) as exc:
        raise StoreUnavailable(f"database unavailable: {short_reason(exc)}") from exc
    except sa_exc.DBAPIError as exc:
        if exc.connection_invalidated:
            raise StoreUnavailable(f"database connection lost: {short_reason(exc)}") from exc
        raise StoreError(f"database error: {short_reason(exc)}") from exc
    except sa_exc.SQLAlchemyError as exc:
        raise StoreError(f"database error: {short_reason(exc)}") from exc


def short_reason(exc: BaseException) -> str:
    """The first line of the DBAPI error message behind ``exc`` (for messages)."""
    orig = getattr(exc, "orig", None)
    return str(orig if orig is not None else exc).strip().splitlines()[0][:300]
