"""Schema migrations: Alembic driven programmatically (no ``alembic.ini`` needed).

``upgrade`` serialises concurrent upgraders: on SQLite the whole run is one
``BEGIN IMMEDIATE`` transaction (SQLite DDL is transactional), on PostgreSQL it holds a
transaction-scoped advisory lock.  The second upgrader therefore reads the version table
only after the first committed and has nothing left to do.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from typing import Literal, TypeVar

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Connection, inspect, text
from sqlalchemy.engine import URL

from ._engine import Engines, make_engines, parse_url, render_url, sqlite_file_missing
from ._errors import StoreUnavailable, translate_errors
from ._schema import Base

__all__ = [
    "MIGRATIONS_DIR",
    "SchemaState",
    "SchemaStatus",
    "alembic_config",
    "current_revision",
    "head_revision",
    "schema_status",
    "upgrade",
    "upgrade_command",
]

MIGRATIONS_DIR = Path(__file__).resolve().parent / "migrations"

#: Arbitrary constant key of the PostgreSQL advisory lock taken while migrating.
_PG_MIGRATION_LOCK = 0x626F756E64737663  # "boundsvc"

_T = TypeVar("_T")

SchemaState = Literal["up_to_date", "behind", "missing", "ahead"]


def alembic_config(connection: Connection | None = None) -> Config:
    """Return an Alembic configuration for the packaged migrations.

    With ``connection``, ``env.py`` runs the migrations on that connection.
    """
    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    cfg.set_main_option("path_separator", "os")
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


@cache
def _script() -> ScriptDirectory:
    return ScriptDirectory.from_config(alembic_config())


def head_revision() -> str:
    """Return the head revision of the packaged migrations (``"0001"``, ...)."""
    head = _script().get_current_head()
    if head is None:  # pragma: no cover - the package always ships revisions
        raise RuntimeError("no migration revisions found")
    return head


def upgrade_command(url: URL | str) -> str:
    """Return the shell command that upgrades the database at ``url`` to head."""
    rendered = url if isinstance(url, str) else render_url(url)
    return f"boundsvc db upgrade --database-url {rendered}"


@dataclass(frozen=True, slots=True)
class SchemaStatus:
    """Where a database stands relative to the packaged migrations.

    ``state`` is ``"up_to_date"``, ``"behind"`` (an older revision, or store tables
    without a version table), ``"missing"`` (no store schema at all) or ``"ahead"``
    (a revision this code does not know: upgrade boundsvc instead).
    """

    state: SchemaState
    current: str | None
    head: str
    url: str

    @property
    def up_to_date(self) -> bool:
        """True when the schema is at head."""
        return self.state == "up_to_date"

    @property
    def command(self) -> str:
        """The exact command that brings the schema to head."""
        return upgrade_command(self.url)

    @property
    def message(self) -> str:
        """A human-readable explanation including the command to run."""
        if self.state == "up_to_date":
            return f"database schema is up to date (revision {self.head})"
        if self.state == "missing":
            return f"database {self.url} has no boundsvc schema; create it with: {self.command}"
        if self.state == "behind":
            return (
                f"database schema is at revision {self.current or '(unversioned)'}, this "
                f"boundsvc needs {self.head}; upgrade it with: {self.command}"
            )
        return (
            f"database schema is at revision {self.current}, which this boundsvc "
            f"(head {self.head}) does not know; upgrade boundsvc"
        )


def _current_revision(connection: Connection) -> str | None:
    return MigrationContext.configure(connection).get_current_revision()


def _status(connection: Connection, url: URL) -> SchemaStatus:
    head = head_revision()
    current = _current_revision(connection)
    state: SchemaState
    if current is None:
        existing = set(inspect(connection).get_table_names())
        state = "behind" if existing & set(Base.metadata.tables) else "missing"
    elif current == head:
        state = "up_to_date"
    elif current in {rev.revision for rev in _script().walk_revisions()}:
        state = "behind"
    else:
        state = "ahead"
    return SchemaStatus(state=state, current=current, head=head, url=render_url(url))


def status_of(engines: Engines) -> SchemaStatus:
    """Return the schema status through already-open engines."""
    with engines.read.connect() as conn:
        return _status(conn, engines.url)


def upgrade_engines(engines: Engines, revision: str = "head") -> None:
    """Upgrade through already-open engines (serialised, see the module docstring)."""
    with engines.write.begin() as conn:
        if conn.dialect.name == "postgresql":
            conn.execute(text("SELECT pg_advisory_xact_lock(:k)"), {"k": _PG_MIGRATION_LOCK})
        command.upgrade(alembic_config(conn), revision)


def _with_engines(url: str | URL, fn: Callable[[Engines], _T]) -> _T:
    engines = make_engines(url)
    try:
        return fn(engines)
    finally:
        engines.dispose()


def upgrade(url: str | URL, revision: str = "head") -> None:
    """Upgrade the database at ``url`` to ``revision`` (default: head).

    This is what ``boundsvc db upgrade --database-url URL`` runs.  Safe to call on an
    up-to-date database and from several processes at once.
    """
    parsed = parse_url(url)
    if sqlite_file_missing(parsed):
        assert parsed.database is not None
        try:
            Path(parsed.database).parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreUnavailable(f"cannot create the directory of {parsed.database}") from exc
    with translate_errors():
        _with_engines(parsed, lambda e: upgrade_engines(e, revision))


def current_revision(url: str | URL) -> str | None:
    """Return the revision the database at ``url`` is at, or None if unversioned."""

    def run(engines: Engines) -> str | None:
        with engines.read.connect() as conn:
            return _current_revision(conn)

    if sqlite_file_missing(parse_url(url)):
        return None
    with translate_errors():
        return _with_engines(url, run)


def schema_status(url: str | URL) -> SchemaStatus:
    """Compare the database at ``url`` with the packaged migrations.

    A SQLite file that does not exist is reported as ``missing`` (and is not created).
    """
    parsed = parse_url(url)
    if sqlite_file_missing(parsed):
        return SchemaStatus("missing", None, head_revision(), render_url(parsed))
    with translate_errors():
        return _with_engines(url, status_of)
