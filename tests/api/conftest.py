"""Fixtures: the app over a temporary SQLite store, and a PostgreSQL variant.

``api`` builds apps with chosen settings over one store; ``db_url`` is parametrised over
SQLite and PostgreSQL (a fresh database per session, a schema per test, as in
``tests/store``).  PostgreSQL is skipped when unreachable unless
``BOUNDSVC_REQUIRE_POSTGRES=1`` (CI), which fails instead.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import psycopg
import pytest
from psycopg import sql
from sqlalchemy.engine import URL, make_url

from boundsvc.api import build_app
from boundsvc.settings import Settings
from boundsvc.store import Store, open_store, upgrade
from tests.inprocess import InProcessClient

PG_SERVER_URL = os.environ.get(
    "BOUNDSVC_TEST_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/postgres"
)
REQUIRE_POSTGRES = os.environ.get("BOUNDSVC_REQUIRE_POSTGRES") == "1"


def libpq(url: URL) -> str:
    """A libpq conninfo URI for a SQLAlchemy URL."""
    return url.set(drivername="postgresql").render_as_string(hide_password=False)


def admin_connect(url: URL) -> psycopg.Connection:
    """An autocommit connection for CREATE/DROP DATABASE."""
    return psycopg.connect(libpq(url), autocommit=True, connect_timeout=5)


def pg_server_or_skip() -> URL:
    """The PostgreSQL server URL; skip (or fail under BOUNDSVC_REQUIRE_POSTGRES=1)."""
    server = make_url(PG_SERVER_URL)
    try:
        admin_connect(server).close()
    except psycopg.OperationalError as exc:
        detail = (str(exc).strip().splitlines() or ["?"])[0]
        reason = f"PostgreSQL unreachable at {server.render_as_string()}: {detail}"
        if REQUIRE_POSTGRES:
            pytest.fail(f"{reason} (BOUNDSVC_REQUIRE_POSTGRES=1)")
        pytest.skip(reason)
    return server


def create_database(server: URL, prefix: str) -> URL:
    """Create ``<prefix><random>`` and return its URL."""
    name = f"{prefix}{secrets.token_hex(6)}"
    with admin_connect(server) as admin:
        admin.execute(sql.SQL("CREATE DATABASE {}").format(sql.Identifier(name)))
    return server.set(database=name)


def drop_database(server: URL, url: URL) -> None:
    """Drop the database of ``url`` (forcing other sessions out)."""
    with admin_connect(server) as admin:
        admin.execute(
            sql.SQL("DROP DATABASE IF EXISTS {} WITH (FORCE)").format(
                sql.Identifier(str(url.database))
            )
        )


@pytest.fixture(scope="session")
def pg_database() -> Iterator[URL]:
    """A fresh PostgreSQL database for this session (dropped afterwards)."""
    server = pg_server_or_skip()
    url = create_database(server, "boundsvc_apitest_")
    try:
        yield url
    finally:
        drop_database(server, url)


@pytest.fixture
def pg_url(pg_database: URL) -> Iterator[str]:
    """An empty schema of the session database, at schema head."""
    schema = f"t_{secrets.token_hex(6)}"
    with admin_connect(pg_database) as conn:
        conn.execute(sql.SQL("CREATE SCHEMA {}").format(sql.Identifier(schema)))
    url = pg_database.update_query_dict({"options": f"-csearch_path={schema}"})
    rendered = url.render_as_string(hide_password=False)
    upgrade(rendered)
    try:
        yield rendered
    finally:
        with admin_connect(pg_database) as conn:
            conn.execute(sql.SQL("DROP SCHEMA {} CASCADE").format(sql.Identifier(schema)))


@pytest.fixture
def sqlite_url(tmp_path: Path) -> str:
    """A SQLite file URL in the test's directory."""
    return f"sqlite:///{tmp_path / 'api.sqlite3'}"


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def db_url(request: pytest.FixtureRequest) -> str:
    """A database at schema head, once per backend."""
    return str(request.getfixturevalue("sqlite_url" if request.param == "sqlite" else "pg_url"))


@pytest.fixture
def store(sqlite_url: str) -> Iterator[Store]:
    """An open SQLite store."""
    opened = open_store(sqlite_url)
    try:
        yield opened
    finally:
        opened.dispose()


@pytest.fixture
def any_store(db_url: str) -> Iterator[Store]:
    """An open store on each backend."""
    opened = open_store(db_url)
    try:
        yield opened
    finally:
        opened.dispose()


class TestClient(InProcessClient):
    """The shared in-process client (tests/inprocess.py), under the name these tests use."""

    __test__ = False


class ApiFactory:
    """Builds test clients of apps over one store with chosen settings."""

    def __init__(self, store: Store) -> None:
        self.store = store
        self._clients: list[TestClient] = []

    def __call__(self, *, raise_server_exceptions: bool = True, **settings: Any) -> TestClient:
        base = Settings(database_url=self.store.url.render_as_string(hide_password=False))
        app = build_app(base.with_overrides(**settings), self.store)
        client = TestClient(app, raise_server_exceptions=raise_server_exceptions)
        self._clients.append(client)
        return client

    def key(self, project: str, *scopes: str) -> dict[str, str]:
        """Create an API key and return its Authorization header."""
        _, token = self.store.create_api_key(
            project, f"test-{project}", list(scopes) or ["read", "write"]
        )  # type: ignore[arg-type]
        return {"Authorization": f"Bearer {token}"}

    def close(self) -> None:
        for client in self._clients:
            client.close()


@pytest.fixture
def api(store: Store) -> Iterator[ApiFactory]:
    """An :class:`ApiFactory` over a SQLite store."""
    factory = ApiFactory(store)
    try:
        yield factory
    finally:
        factory.close()


@pytest.fixture
def any_api(any_store: Store) -> Iterator[ApiFactory]:
    """An :class:`ApiFactory` on each backend."""
    factory = ApiFactory(any_store)
    try:
        yield factory
    finally:
        factory.close()


@pytest.fixture
def client(api: ApiFactory) -> TestClient:
    """A client of the app in open (loopback, no key) mode."""
    return api()
