"""Engine construction: URL validation, SQLite pragmas and transaction modes.

SQLite write transactions start with ``BEGIN IMMEDIATE`` so that a writer takes the
database write lock up front and waits (``busy_timeout``) instead of failing with
``SQLITE_BUSY`` when it upgrades a read lock half way through a transaction.  Read
transactions use a plain (deferred) ``BEGIN``; with WAL they never block writers.

Implementation follows the SQLAlchemy recipe "Using SQLAlchemy to emit BEGIN in lieu of
SQLite's transaction control": the pysqlite connection gets ``isolation_level = None``
(the driver never emits BEGIN itself) and a ``begin`` event emits our own BEGIN.  The
write engine is an option view of the same engine (shared pool) carrying
``boundsvc_write=True``, which the ``begin`` hook reads.
"""

from __future__ import annotations

import random
import sqlite3
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sqlalchemy import Connection, Engine, create_engine, event
from sqlalchemy.engine import URL, make_url
from sqlalchemy.exc import ArgumentError
from sqlalchemy.pool import ConnectionPoolEntry

__all__ = [
    "SQLITE_BUSY_TIMEOUT_MS",
    "Engines",
    "make_engines",
    "parse_url",
    "render_url",
    "sqlite_file_missing",
]

#: How long an SQLite connection waits for a lock before giving up (milliseconds).
SQLITE_BUSY_TIMEOUT_MS = 30_000

_WRITE_OPTION = "boundsvc_write"

#: Pragmas applied to every new SQLite connection, in this order (``busy_timeout`` first
#: so that switching to WAL on a fresh file waits for a concurrent opener where SQLite
#: calls the busy handler; where it does not, see :func:`_execute_pragma`).
SQLITE_PRAGMAS: tuple[tuple[str, str], ...] = (
    ("busy_timeout", str(SQLITE_BUSY_TIMEOUT_MS)),
    ("journal_mode", "WAL"),
    ("synchronous", "FULL"),
    ("foreign_keys", "ON"),
)


@dataclass(frozen=True, slots=True)
class Engines:
    """The read engine and its write view (same pool, ``BEGIN IMMEDIATE`` on SQLite)."""

    read: Engine
    write: Engine

    @property
    def url(self) -> URL:
        """The database URL."""
        return self.read.url

    def dispose(self) -> None:
        """Close every pooled connection."""
        self.read.dispose()


def parse_url(url: str | URL) -> URL:
    """Parse and validate a database URL (SQLite file or PostgreSQL via psycopg 3).

    A bare ``postgresql://`` URL is pinned to psycopg 3.  Raises :class:`ValueError`
    for anything else, including in-memory SQLite (each pooled
    connection would see its own empty database).
    """
    try:
        parsed = make_url(url)
    except ArgumentError as exc:
        raise ValueError(f"not a database URL: {url!r}") from exc
    backend = parsed.get_backend_name()
    if backend == "sqlite":
        if parsed.get_driver_name() not in ("pysqlite", ""):
            raise ValueError("only the pysqlite (stdlib sqlite3) SQLite driver is supported")
        if not parsed.database or parsed.database == ":memory:" or "mode=memory" in str(parsed):
            raise ValueError("in-memory SQLite is not supported; use sqlite:///path/to/file")
        return parsed
    if backend == "postgresql":
        if parsed.drivername == "postgresql":  # the default driver differs across versions
            parsed = parsed.set(drivername="postgresql+psycopg")
        if parsed.get_driver_name() != "psycopg":
            raise ValueError("PostgreSQL URLs must use psycopg 3: postgresql+psycopg://...")
        return parsed
    raise ValueError(f"unsupported database backend {backend!r} (use sqlite or postgresql)")


def render_url(url: URL) -> str:
    """Render a URL for messages: the password, if any, is masked."""
    return url.render_as_string(hide_password=True)


def sqlite_file_missing(url: URL) -> bool:
    """True for a SQLite URL whose database file does not exist (yet)."""
    if url.get_backend_name() != "sqlite" or not url.database:
        return False
    return not Path(url.database).exists()


def _is_lock_error(exc: sqlite3.OperationalError) -> bool:
    text = str(exc).lower()
    return "locked" in text or "busy" in text


def _execute_pragma(cursor: Any, statement: str, deadline: float) -> None:
    """Run ``statement``, retrying while SQLite reports the database locked.

    Switching a fresh file to WAL needs an exclusive lock, and when two connections
    open the same new file at once SQLite can answer ``SQLITE_BUSY`` at once, without
    calling the busy handler (it does so where waiting could deadlock).  The busy
    timeout therefore does not cover this step; we retry with a short jittered pause
    until the same timeout has passed, then let the error through.
    """
    pause = 0.005
    while True:
        try:
            cursor.execute(statement)
            return
        except sqlite3.OperationalError as exc:
            if not _is_lock_error(exc) or time.monotonic() + pause > deadline:
                raise
        time.sleep(pause * (0.5 + random.random()))  # noqa: S311 - jitter, not security
        pause = min(pause * 2, 0.25)


def _on_sqlite_connect(dbapi_connection: Any, _record: ConnectionPoolEntry) -> None:
    # Driver-level autocommit: pysqlite must never emit BEGIN itself (our hook does).
    dbapi_connection.isolation_level = None
    deadline = time.monotonic() + SQLITE_BUSY_TIMEOUT_MS / 1000
    cursor = dbapi_connection.cursor()
    try:
        for name, value in SQLITE_PRAGMAS:
            _execute_pragma(cursor, f"PRAGMA {name} = {value}", deadline)
    finally:
        cursor.close()


def _on_sqlite_begin(conn: Connection) -> None:
    if conn.get_execution_options().get(_WRITE_OPTION, False):
        conn.exec_driver_sql("BEGIN IMMEDIATE")
    else:
        conn.exec_driver_sql("BEGIN")


def make_engines(url: str | URL, *, echo: bool = False) -> Engines:
    """Create the engines for ``url`` (see the module docstring for the SQLite setup)."""
    parsed = parse_url(url)
    if parsed.get_backend_name() == "sqlite":
        engine = create_engine(
            parsed,
            echo=echo,
            pool_size=8,
            max_overflow=16,
            pool_timeout=SQLITE_BUSY_TIMEOUT_MS / 1000,
            connect_args={"timeout": SQLITE_BUSY_TIMEOUT_MS / 1000},
        )
        event.listen(engine, "connect", _on_sqlite_connect)
        event.listen(engine, "begin", _on_sqlite_begin)
    else:
        engine = create_engine(
            parsed,
            echo=echo,
            pool_pre_ping=True,
            pool_size=8,
            max_overflow=16,
            pool_timeout=30,
        )
    return Engines(read=engine, write=engine.execution_options(**{_WRITE_OPTION: True}))
