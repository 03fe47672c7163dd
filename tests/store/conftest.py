"""Fixtures: every store test runs against a SQLite file and a PostgreSQL database.

PostgreSQL: one fresh database ``boundsvc_test_<random>`` per pytest session (so per
xdist worker), dropped at the end; each test gets its own schema in it (via
``search_path``), so tests never see each other's rows.  The server is taken from
``BOUNDSVC_TEST_POSTGRES_URL`` (default: local trust auth).  If it is unreachable the
PostgreSQL half is skipped, unless ``BOUNDSVC_REQUIRE_POSTGRES=1`` (CI), which fails.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterator
from pathlib import Path

import psycopg
import pytest
from psycopg import sql
from sqlalchemy.engine import URL, make_url

from boundsvc.store import Store, StoredCertificate, open_store, upgrade

PG_SERVER_URL = os.environ.get(
    "BOUNDSVC_TEST_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/postgres"
)
REQUIRE_POSTGRES = os.environ.get("BOUNDSVC_REQUIRE_POSTGRES") == "1"


def _libpq(url: URL) -> str:
    """A libpq conninfo URI for a SQLAlchemy URL (drops the +psycopg driver suffix)."""
    return url.set(drivername="postgresql").render_as_string(hide_password=False)


def _admin_connect(url: URL) -> psycopg.Connection:
    return psycopg.connect(_libpq(url), autocommit=True, connect_timeout=5)


@pytest.fixture(scope="session")
def pg_database() -> Iterator[URL]:
    """A fresh PostgreSQL database for this test session (dropped afterwards)."""
    server = make_url(PG_SERVER_URL)
    try:
        admin = _admin_connect(server)
    except psycopg.OperationalError as exc:
        detail = (str(exc).strip().splitlines() or ["?"])[0]
        reason = f"PostgreSQL unreachable at {server.render_as_string()}: {detail}"
        if REQUIRE_POSTGRES:
            pytest.fail(f"{reason} (BOUNDSVC_REQUIRE_POSTGRES=1)")
        pytest.skip(reason)
    name = f"boundsvc_test_{secrets.token_hex(6)}"
    with admin:
        admin.execute(sql.SQL("CREATE DATABASE {}").format(sql.Identifier(name)))
    try:
        yield server.set(database=name)
    finally:
        with _admin_connect(server) as admin:
            admin.execute(
                sql.SQL("DROP DATABASE IF EXISTS {} WITH (FORCE)").format(sql.Identifier(name))
            )


@pytest.fixture
def pg_url(pg_database: URL) -> Iterator[str]:
    """An empty schema of the session database, selected through ``search_path``."""
    schema = f"t_{secrets.token_hex(6)}"
    with _admin_connect(pg_database) as conn:
        conn.execute(sql.SQL("CREATE SCHEMA {}").format(sql.Identifier(schema)))
    url = pg_database.update_query_dict({"options": f"-csearch_path={schema}"})
    try:
        yield url.render_as_string(hide_password=False)
    finally:
        with _admin_connect(pg_database) as conn:
            conn.execute(sql.SQL("DROP SCHEMA {} CASCADE").format(sql.Identifier(schema)))


@pytest.fixture
def sqlite_url(tmp_path: Path) -> str:
    """A SQLite file URL in the test's temporary directory (the file does not exist)."""
    return f"sqlite:///{tmp_path / 'store.sqlite3'}"


@pytest.fixture(
    params=[
        pytest.param("sqlite"),
        pytest.param("postgresql", marks=pytest.mark.postgres),
    ]
)
def db_url(request: pytest.FixtureRequest) -> str:
    """An empty database URL, once per backend."""
    fixture = "sqlite_url" if request.param == "sqlite" else "pg_url"
    return str(request.getfixturevalue(fixture))


@pytest.fixture
def store(db_url: str) -> Iterator[Store]:
    """An open store at schema head on each backend."""
    if db_url.startswith("postgresql"):
        upgrade(db_url)
    opened = open_store(db_url)
    try:
        yield opened
    finally:
        opened.dispose()


class CertFactory:
    """Stores certificates with sensible defaults (``document`` derived from the id)."""

    def __init__(self, store: Store) -> None:
        self.store = store

    def __call__(self, id: str, **overrides: object) -> StoredCertificate:
        fields: dict[str, object] = {
            "project": "proj-a",
            "model_name": "heat-mlp",
            "model_version": "1",
            "family": "heat",
            "status": "certified",
            "document": f'{{"id":"{id}","bound":1.5e-3}}'.encode(),
        }
        fields.update(overrides)
        return self.store.put_certificate(id=id, **fields)  # type: ignore[arg-type]


@pytest.fixture
def put_cert(store: Store) -> CertFactory:
    """A :class:`CertFactory` on the ``store`` fixture."""
    return CertFactory(store)
