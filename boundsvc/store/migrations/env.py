"""Alembic environment for the boundsvc store.

It is driven programmatically by :mod:`boundsvc.store._migrations`, which passes an open
:class:`sqlalchemy.Connection` in ``config.attributes["connection"]`` (SQLite: inside a
``BEGIN IMMEDIATE`` transaction; PostgreSQL: holding a transaction-scoped advisory lock),
so concurrent upgraders serialise and the second one finds the schema already at head.
Running ``alembic`` from the command line with ``sqlalchemy.url`` set also works.
"""

from __future__ import annotations

from alembic import context
from sqlalchemy import Connection

from boundsvc.store._engine import make_engines
from boundsvc.store._schema import Base

target_metadata = Base.metadata


def _run(connection: Connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        compare_type=True,
        render_as_batch=connection.dialect.name == "sqlite",
        transaction_per_migration=False,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    """Run the migrations on the given connection, or on ``sqlalchemy.url``."""
    config = context.config
    connection = config.attributes.get("connection")
    if connection is not None:
        _run(connection)
        return
    url = config.get_main_option("sqlalchemy.url")
    if not url:
        raise RuntimeError("no connection given and sqlalchemy.url is not set")
    engines = make_engines(url)
    try:
        with engines.write.begin() as conn:
            _run(conn)
    finally:
        engines.dispose()


def run_migrations_offline() -> None:
    """Emit the migration SQL for ``sqlalchemy.url`` without connecting."""
    context.configure(
        url=context.config.get_main_option("sqlalchemy.url"),
        target_metadata=target_metadata,
        literal_binds=True,
    )
    with context.begin_transaction():
        context.run_migrations()


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
