"""Plain, immutable value objects returned by the store (no ORM objects leak out)."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any, Literal

__all__ = [
    "API_SCOPES",
    "ApiKeyRecord",
    "ApiScope",
    "ArchiveInfo",
    "CertificateCount",
    "CertificatePage",
    "CertificateSummary",
    "IdempotencyOutcome",
    "InProgress",
    "Mismatch",
    "Replay",
    "ResidualArchive",
    "Started",
    "StoredCertificate",
    "StoredPlan",
    "StoredProblem",
    "StoredStudy",
]

ApiScope = Literal["read", "write", "admin"]
#: Every valid API-key scope.
API_SCOPES: frozenset[str] = frozenset({"read", "write", "admin"})


@dataclass(frozen=True, slots=True)
class StoredProblem:
    """A stored problem description."""

    id: str
    body: Any
    family: str
    created_at: datetime


@dataclass(frozen=True, slots=True)
class StoredPlan:
    """A stored plan; ``spec`` is the request that regenerates it."""

    id: str
    problem_id: str | None
    spec: Any
    created_at: datetime


@dataclass(frozen=True, slots=True)
class CertificateSummary:
    """Certificate metadata (everything except the document)."""

    id: str
    project: str
    model_name: str
    model_version: str | None
    family: str
    status: str
    created_at: datetime
    problem_id: str | None
    plan_id: str | None


@dataclass(frozen=True, slots=True)
class StoredCertificate(CertificateSummary):
    """A certificate with its canonical JSON document, byte-identical to what was stored."""

    document: bytes


@dataclass(frozen=True, slots=True)
class CertificatePage:
    """One page of certificates, newest first; ``next_cursor`` is None on the last page."""

    items: list[CertificateSummary]
    next_cursor: str | None


@dataclass(frozen=True, slots=True)
class CertificateCount:
    """Number of certificates with one (status, family) combination."""

    status: str
    family: str
    count: int


@dataclass(frozen=True, slots=True)
class ResidualArchive:
    """A compressed residual archive; ``sha256`` is the hex digest of ``blob``."""

    certificate_id: str
    blob: bytes
    codec: str
    sha256: str
    created_at: datetime


@dataclass(frozen=True, slots=True)
class ArchiveInfo:
    """What is known about a stored archive without reading its blob."""

    certificate_id: str
    codec: str
    sha256: str
    size_bytes: int
    created_at: datetime


@dataclass(frozen=True, slots=True)
class StoredStudy:
    """A stored study document."""

    id: str
    project: str
    document: Any
    created_at: datetime


@dataclass(frozen=True, slots=True)
class ApiKeyRecord:
    """An API key as the application sees it (never contains the secret or its hash)."""

    id: str
    project: str
    name: str
    scopes: tuple[ApiScope, ...]
    created_at: datetime
    revoked_at: datetime | None
    last_used_at: datetime | None

    @property
    def revoked(self) -> bool:
        """True once the key has been revoked."""
        return self.revoked_at is not None


@dataclass(frozen=True, slots=True)
class Started:
    """``begin_idempotent``: this caller owns the key and must finish or abandon it."""


@dataclass(frozen=True, slots=True)
class Replay:
    """``begin_idempotent``: the request already completed; return this response again."""

    status: int
    body: bytes


@dataclass(frozen=True, slots=True)
class InProgress:
    """``begin_idempotent``: another request with this key is still running (HTTP 409)."""


@dataclass(frozen=True, slots=True)
class Mismatch:
    """``begin_idempotent``: the key was used with a different request body (HTTP 422)."""


IdempotencyOutcome = Started | Replay | InProgress | Mismatch
