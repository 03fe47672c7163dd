"""Engine set-up: URL validation, SQLite pragmas and BEGIN modes, PostgreSQL types."""

from __future__ import annotations

import sqlite3
import threading
import time
from collections.abc import Iterator
from typing import Any

import pytest
from sqlalchemy import event, text

from boundsvc.store import SQLITE_BUSY_TIMEOUT_MS, Store, open_store, upgrade
from boundsvc.store._engine import _execute_pragma, make_engines, parse_url


@pytest.fixture
def sqlite_store(sqlite_url: str) -> Iterator[Store]:
    """A store on a SQLite file only."""
    store = open_store(sqlite_url)
    yield store
    store.dispose()


@pytest.mark.parametrize(
    "url",
    [
        "sqlite://",
        "sqlite:///:memory:",
        "sqlite+aiosqlite:///x.db",
        "mysql://u@h/db",
        "postgresql+psycopg2://postgres@localhost/db",
        "not a url",
    ],
)
def test_unsupported_urls(url: str) -> None:
    with pytest.raises(ValueError):
        parse_url(url)


def test_supported_urls() -> None:
    assert parse_url("sqlite:///./boundsvc.sqlite3").database == "./boundsvc.sqlite3"
    assert parse_url("postgresql+psycopg://u:p@db.example:5432/boundsvc").host == "db.example"
    assert parse_url("postgresql://u@db/boundsvc").drivername == "postgresql+psycopg"


def test_sqlite_pragmas_are_set_on_every_connection(sqlite_store: Store) -> None:
    engines = sqlite_store._engines
    # Hold one connection so the second checkout is a different DBAPI connection.
    with engines.read.connect() as first, engines.write.connect() as second:
        for conn in (first, second):
            assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
            assert conn.exec_driver_sql("PRAGMA synchronous").scalar() == 2  # FULL
            assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
            assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() == SQLITE_BUSY_TIMEOUT_MS
        assert first.connection.dbapi_connection is not second.connection.dbapi_connection


class _FlakyCursor:
    """A cursor whose first ``failures`` statements fail with ``error``."""

    def __init__(self, failures: int, error: str) -> None:
        self.failures = failures
        self.error = error
        self.calls = 0

    def execute(self, statement: str) -> None:
        self.calls += 1
        if self.calls <= self.failures:
            raise sqlite3.OperationalError(self.error)


def test_pragma_retries_an_immediate_busy_answer() -> None:
    # SQLite can answer SQLITE_BUSY to the WAL switch without calling the busy handler
    # when two connections open a new file at once (seen in CI as "database is locked").
    cursor = _FlakyCursor(3, "database is locked")
    _execute_pragma(cursor, "PRAGMA journal_mode = WAL", time.monotonic() + 5)
    assert cursor.calls == 4


def test_pragma_gives_up_at_the_deadline() -> None:
    cursor = _FlakyCursor(10**6, "database is locked")
    start = time.monotonic()
    with pytest.raises(sqlite3.OperationalError, match="locked"):
        _execute_pragma(cursor, "PRAGMA journal_mode = WAL", start + 0.2)
    assert cursor.calls > 1
    assert time.monotonic() - start < 2


def test_pragma_does_not_retry_other_errors() -> None:
    cursor = _FlakyCursor(1, "disk I/O error")
    with pytest.raises(sqlite3.OperationalError, match="disk"):
        _execute_pragma(cursor, "PRAGMA journal_mode = WAL", time.monotonic() + 5)
    assert cursor.calls == 1


def test_sqlite_writes_begin_immediate_reads_deferred(
    sqlite_store: Store,
) -> None:
    statements: list[str] = []

    def record(_conn: Any, _cursor: Any, statement: str, *_args: Any) -> None:
        if statement.startswith("BEGIN"):
            statements.append(statement)

    engine = sqlite_store._engines.read
    event.listen(engine, "before_cursor_execute", record)
    try:
        sqlite_store.put_problem("p1", {"x": 1}, "heat")
        assert statements == ["BEGIN IMMEDIATE"]
        statements.clear()
        assert sqlite_store.get_problem("p1") is not None
        assert statements == ["BEGIN"]
    finally:
        event.remove(engine, "before_cursor_execute", record)


def test_sqlite_writer_waits_for_a_held_write_lock(sqlite_store: Store) -> None:
    """A second writer blocks on busy_timeout instead of failing with SQLITE_BUSY."""
    holding = threading.Event()

    def hold_lock() -> None:
        with sqlite_store._engines.write.begin() as conn:
            conn.execute(text("SELECT 1"))
            holding.set()
            time.sleep(0.5)

    holder = threading.Thread(target=hold_lock)
    holder.start()
    try:
        assert holding.wait(10)
        start = time.monotonic()
        sqlite_store.put_problem("p1", {"x": 1}, "heat")
        assert time.monotonic() - start > 0.2
        # Readers are not blocked by the writer (WAL).
    finally:
        holder.join()
    assert sqlite_store.get_problem("p1") is not None


def test_sqlite_foreign_keys_are_enforced(sqlite_store: Store) -> None:
    with pytest.raises(Exception, match="FOREIGN KEY"), sqlite_store._engines.write.begin() as c:
        c.execute(
            text(
                "INSERT INTO plans (id, problem_id, spec, created_at) "
                "VALUES ('x', 'missing', '{}', '2024-01-01 00:00:00.000000')"
            )
        )


@pytest.mark.postgres
def test_postgres_column_types(pg_url: str) -> None:
    upgrade(pg_url)
    engines = make_engines(pg_url)
    try:
        with engines.read.connect() as conn:
            rows = conn.execute(
                text(
                    "SELECT table_name, column_name, data_type FROM information_schema.columns "
                    "WHERE table_schema = current_schema()"
                )
            ).all()
    finally:
        engines.dispose()
    types = {(t, c): d for t, c, d in rows}
    for column in [
        ("problems", "body"),
        ("plans", "spec"),
        ("api_keys", "scopes"),
        ("studies", "document"),
    ]:
        assert types[column] == "jsonb", column
    assert types[("certificates", "document")] == "bytea"
    assert types[("residual_archives", "blob")] == "bytea"
    created = {d for (t, c), d in types.items() if c.endswith("_at")}
    assert created == {"timestamp with time zone"}


def test_ping(store: Store) -> None:
    assert store.ping() is True


def test_ping_unreachable() -> None:
    store = Store(make_engines("postgresql+psycopg://postgres@127.0.0.1:1/x?connect_timeout=2"))
    try:
        assert store.ping() is False
    finally:
        store.dispose()


def test_dialect(store: Store) -> None:
    assert store.dialect in ("sqlite", "postgresql")
    assert store.url.get_backend_name() == store.dialect
