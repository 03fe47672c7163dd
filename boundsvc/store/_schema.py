"""ORM metadata: the tables of the boundsvc store.

This module is the single source of truth for the schema; the Alembic revisions in
``migrations/versions`` must produce exactly this metadata (a test compares them with
Alembic's ``compare_metadata`` on SQLite and PostgreSQL).
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from sqlalchemy import (
    JSON,
    DateTime,
    ForeignKey,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Text,
    UniqueConstraint,
)
from sqlalchemy.dialects.postgresql import JSONB
from sqlalchemy.engine import Dialect
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column
from sqlalchemy.types import TypeDecorator, TypeEngine

__all__ = [
    "ApiKeyRow",
    "Base",
    "CertificateRow",
    "IdempotencyKeyRow",
    "JSONType",
    "PlanRow",
    "ProblemRow",
    "ResidualArchiveRow",
    "StudyRow",
    "UTCDateTime",
    "utcnow",
]

#: Deterministic constraint names, identical on every backend (Alembic relies on them).
NAMING_CONVENTION: dict[str, str] = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

#: JSON on SQLite, JSONB on PostgreSQL.
JSONType: TypeEngine[Any] = JSON().with_variant(JSONB(), "postgresql")


def utcnow() -> datetime:
    """Return the current time as a timezone-aware UTC datetime."""
    return datetime.now(UTC)


class UTCDateTime(TypeDecorator[datetime]):
    """A ``TIMESTAMP WITH TIME ZONE`` that only accepts and only returns aware UTC values.

    SQLite has no time-zone type: values are normalised to UTC and stored as naive ISO
    text (fixed width, so lexical order is chronological order); the UTC zone is attached
    again on load.  PostgreSQL stores ``timestamptz``; loaded values are converted to UTC.
    """

    impl = DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: Dialect) -> datetime | None:
        """Reject naive datetimes and normalise aware ones to UTC."""
        if value is None:
            return None
        if value.tzinfo is None or value.utcoffset() is None:
            raise ValueError("naive datetime given to a UTC column; pass an aware datetime")
        value = value.astimezone(UTC)
        if dialect.name == "sqlite":
            return value.replace(tzinfo=None)
        return value

    def process_result_value(self, value: datetime | None, dialect: Dialect) -> datetime | None:
        """Return an aware UTC datetime."""
        if value is None:
            return None
        if value.tzinfo is None:
            return value.replace(tzinfo=UTC)
        return value.astimezone(UTC)


class Base(DeclarativeBase):
    """Declarative base of all store tables."""

    metadata = MetaData(naming_convention=NAMING_CONVENTION)


class ProblemRow(Base):
    """A PDE problem description, content-addressed by the caller."""

    __tablename__ = "problems"

    id: Mapped[str] = mapped_column(String(128), primary_key=True)
    body: Mapped[Any] = mapped_column(JSONType, nullable=False)
    family: Mapped[str] = mapped_column(String(64), nullable=False)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime(), nullable=False)


class PlanRow(Base):
    """A certification plan; ``spec`` is the request that regenerates it."""

    __tablename__ = "plans"

    id: Mapped[str] = mapped_column(String(128), primary_key=True)
    problem_id: Mapped[str | None] = mapped_column(
        String(128), ForeignKey("problems.id"), nullable=True
    )
    spec: Mapped[Any] = mapped_column(JSONType, nullable=False)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime(), nullable=False)


class CertificateRow(Base):
    """An immutable certificate; ``document`` holds its canonical JSON bytes verbatim."""

    __tablename__ = "certificates"
    __table_args__ = (
        Index("ix_certificates_project_created_at_id", "project", "created_at", "id"),
        Index("ix_certificates_created_at_id", "created_at", "id"),
        Index("ix_certificates_model_name_model_version", "model_name", "model_version"),
    )

    id: Mapped[str] = mapped_column(String(128), primary_key=True)
    project: Mapped[str] = mapped_column(String(128), nullable=False)
    model_name: Mapped[str] = mapped_column(String(256), nullable=False)
    model_version: Mapped[str | None] = mapped_column(String(128), nullable=True)
    family: Mapped[str] = mapped_column(String(64), nullable=False)
    status: Mapped[str] = mapped_column(String(32), nullable=False)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime(), nullable=False)
    document: Mapped[bytes] = mapped_column(LargeBinary(), nullable=False)
    problem_id: Mapped[str | None] = mapped_column(
        String(128), ForeignKey("problems.id"), nullable=True
    )
    plan_id: Mapped[str | None] = mapped_column(String(128), ForeignKey("plans.id"), nullable=True)


class ResidualArchiveRow(Base):
    """Compressed residual samples of a certificate, kept for later re-verification."""

    __tablename__ = "residual_archives"

    certificate_id: Mapped[str] = mapped_column(
        String(128), ForeignKey("certificates.id"), primary_key=True
    )
    blob: Mapped[bytes] = mapped_column(LargeBinary(), nullable=False)
    codec: Mapped[str] = mapped_column(String(32), nullable=False)
    sha256: Mapped[str] = mapped_column(String(64), nullable=False)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime(), nullable=False)


class IdempotencyKeyRow(Base):
    """One ``Idempotency-Key`` of one project; ``(project, key)`` is unique in the database."""

    __tablename__ = "idempotency_keys"
    __table_args__ = (UniqueConstraint("project", "key"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=True)
    project: Mapped[str] = mapped_column(String(128), nullable=False)
    key: Mapped[str] = mapped_column(String(256), nullable=False)
    request_sha256: Mapped[str] = mapped_column(String(64), nullable=False)
    state: Mapped[str] = mapped_column(String(16), nullable=False)
    response_status: Mapped[int | None] = mapped_column(Integer, nullable=True)
    response_body: Mapped[bytes | None] = mapped_column(LargeBinary(), nullable=True)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime(), nullable=False)
    updated_at: Mapped[datetime] = mapped_column(UTCDateTime(), nullable=False)


class ApiKeyRow(Base):
    """An API key; only a salted hash of its secret is stored."""

    __tablename__ = "api_keys"

    id: Mapped[str] = mapped_column(String(64), primary_key=True)
    project: Mapped[str] = mapped_column(String(128), nullable=False, index=True)
    name: Mapped[str] = mapped_column(String(256), nullable=False)
    scopes: Mapped[Any] = mapped_column(JSONType, nullable=False)
    secret_hash: Mapped[str] = mapped_column(Text, nullable=False)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime(), nullable=False)
    revoked_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), nullable=True)
    last_used_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), nullable=True)


class StudyRow(Base):
    """A study document (input of the reports feature)."""

    __tablename__ = "studies"
    __table_args__ = (Index("ix_studies_project_created_at_id", "project", "created_at", "id"),)

    id: Mapped[str] = mapped_column(String(128), primary_key=True)
    project: Mapped[str] = mapped_column(String(128), nullable=False)
    document: Mapped[Any] = mapped_column(JSONType, nullable=False)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime(), nullable=False)
