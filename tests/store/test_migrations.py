"""Alembic migrations: they build exactly the ORM schema; status and upgrade rules."""

from __future__ import annotations

import shutil
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest
from alembic import command
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import text

from boundsvc.store import (
    SchemaOutOfDate,
    StoreUnavailable,
    _migrations,
    current_revision,
    head_revision,
    open_store,
    schema_status,
    upgrade,
    upgrade_command,
)
from boundsvc.store._engine import make_engines, parse_url, render_url
from boundsvc.store._migrations import alembic_config
from boundsvc.store._schema import Base

REVISION_0002 = '''"""Test-only second revision.

Revision ID: 0002
Revises: 0001
Create Date: 2025-01-02 00:00:00+00:00
"""

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table("extra", sa.Column("id", sa.Integer, primary_key=True))


def downgrade() -> None:
    op.drop_table("extra")
'''


def _command(url: str) -> str:
    return f"boundsvc db upgrade --database-url {render_url(parse_url(url))}"


def _diffs(url: str) -> list[object]:
    engines = make_engines(url)
    try:
        with engines.read.connect() as conn:
            context = MigrationContext.configure(
                conn, opts={"compare_type": True, "compare_server_default": True}
            )
            return list(compare_metadata(context, Base.metadata))
    finally:
        engines.dispose()


def _execute(url: str, sql: str) -> None:
    engines = make_engines(url)
    try:
        with engines.write.begin() as conn:
            conn.execute(text(sql))
    finally:
        engines.dispose()


@pytest.fixture
def newer_code(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    """Pretend this boundsvc ships a revision 0002 (so a 0001 database is behind)."""
    scripts = tmp_path / "migrations"
    shutil.copytree(_migrations.MIGRATIONS_DIR, scripts)
    (scripts / "versions" / "0002_extra.py").write_text(REVISION_0002)
    monkeypatch.setattr(_migrations, "MIGRATIONS_DIR", scripts)
    _migrations._script.cache_clear()
    yield
    monkeypatch.undo()
    _migrations._script.cache_clear()


def test_head_revision() -> None:
    assert head_revision() == "0001"


def test_migrations_produce_exactly_the_orm_schema(db_url: str) -> None:
    upgrade(db_url)
    assert _diffs(db_url) == []


def test_status_lifecycle(db_url: str) -> None:
    status = schema_status(db_url)
    assert (status.state, status.current, status.head) == ("missing", None, "0001")
    assert status.command == _command(db_url)
    assert current_revision(db_url) is None
    upgrade(db_url)
    assert schema_status(db_url).up_to_date
    assert current_revision(db_url) == "0001"
    upgrade(db_url)  # idempotent
    assert current_revision(db_url) == "0001"


def test_downgrade_and_upgrade_again(db_url: str) -> None:
    upgrade(db_url)
    engines = make_engines(db_url)
    try:
        with engines.write.begin() as conn:
            command.downgrade(alembic_config(conn), "base")
    finally:
        engines.dispose()
    assert schema_status(db_url).state == "missing"
    upgrade(db_url)
    assert _diffs(db_url) == []


def test_sqlite_is_created_on_first_open(sqlite_url: str) -> None:
    path = Path(parse_url(sqlite_url).database or "")
    assert schema_status(sqlite_url).state == "missing"
    assert not path.exists()  # checking the status does not create the file
    store = open_store(sqlite_url)
    try:
        assert path.exists()
        assert store.schema_status().up_to_date
    finally:
        store.dispose()
    assert _diffs(sqlite_url) == []


def test_sqlite_create_false_does_not_create(sqlite_url: str) -> None:
    with pytest.raises(SchemaOutOfDate) as info:
        open_store(sqlite_url, create=False)
    assert _command(sqlite_url) in str(info.value)
    assert info.value.command == _command(sqlite_url)
    assert not Path(parse_url(sqlite_url).database or "").exists()


def test_sqlite_nested_directory_is_created(tmp_path: Path) -> None:
    store = open_store(f"sqlite:///{tmp_path / 'var' / 'db' / 'boundsvc.sqlite3'}")
    store.dispose()
    assert (tmp_path / "var" / "db" / "boundsvc.sqlite3").exists()


@pytest.mark.postgres
def test_empty_postgres_is_not_created_implicitly(pg_url: str) -> None:
    with pytest.raises(SchemaOutOfDate) as info:
        open_store(pg_url)
    assert info.value.command == _command(pg_url)
    assert f"create it with: {_command(pg_url)}" in str(info.value)
    assert current_revision(pg_url) is None


@pytest.mark.usefixtures("newer_code")
def test_behind_raises_with_the_command_and_is_not_upgraded(db_url: str) -> None:
    upgrade(db_url, "0001")
    assert head_revision() == "0002"
    status = schema_status(db_url)
    assert (status.state, status.current, status.head) == ("behind", "0001", "0002")
    for create in (True, False):
        with pytest.raises(SchemaOutOfDate) as info:
            open_store(db_url, create=create)
        message = str(info.value)
        assert "0001" in message and "0002" in message
        assert f"upgrade it with: boundsvc db upgrade --database-url {status.url}" in message
        assert info.value.command == _command(db_url) == upgrade_command(db_url)
    assert current_revision(db_url) == "0001"  # never upgraded silently
    upgrade(db_url)
    assert current_revision(db_url) == "0002"
    open_store(db_url).dispose()


def test_unversioned_tables_are_behind(db_url: str) -> None:
    engines = make_engines(db_url)
    try:
        Base.metadata.create_all(engines.write)
    finally:
        engines.dispose()
    assert schema_status(db_url).state == "behind"
    with pytest.raises(SchemaOutOfDate, match="unversioned"):
        open_store(db_url)


def test_unknown_revision_is_ahead(db_url: str) -> None:
    upgrade(db_url)
    _execute(db_url, "UPDATE alembic_version SET version_num = '9999'")
    status = schema_status(db_url)
    assert (status.state, status.current) == ("ahead", "9999")
    with pytest.raises(SchemaOutOfDate, match="upgrade boundsvc"):
        open_store(db_url)


def test_concurrent_upgrades_serialise(db_url: str) -> None:
    with ThreadPoolExecutor(max_workers=4) as pool:
        for future in [pool.submit(upgrade, db_url) for _ in range(4)]:
            future.result(timeout=120)
    assert current_revision(db_url) == "0001"
    assert _diffs(db_url) == []


def test_concurrent_first_opens_of_sqlite(sqlite_url: str) -> None:
    def open_and_close() -> bool:
        store = open_store(sqlite_url)
        try:
            return store.ping()
        finally:
            store.dispose()

    with ThreadPoolExecutor(max_workers=6) as pool:
        assert all(f.result(timeout=120) for f in [pool.submit(open_and_close) for _ in range(6)])
    assert current_revision(sqlite_url) == "0001"


def test_unreachable_postgres() -> None:
    url = "postgresql+psycopg://postgres@127.0.0.1:1/nothing?connect_timeout=2"
    with pytest.raises(StoreUnavailable):
        open_store(url)
    with pytest.raises(StoreUnavailable):
        schema_status(url)
    with pytest.raises(StoreUnavailable):
        upgrade(url)


def test_unusable_sqlite_path(tmp_path: Path) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("not a directory")
    with pytest.raises(StoreUnavailable):
        open_store(f"sqlite:///{blocker / 'db.sqlite3'}")


def test_upgrade_creates_the_sqlite_directory(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'new' / 'dir' / 'db.sqlite3'}"
    upgrade(url)
    assert current_revision(url) == "0001"
    open_store(url, create=False).dispose()
