"""``boundsvc db upgrade`` and ``boundsvc db status``: the database schema (Alembic);
``boundsvc db purge-idempotency`` and ``boundsvc db purge-archives``: retention.

An existing database is never migrated implicitly: ``boundsvc serve`` refuses to start on
a schema that is behind and names the ``boundsvc db upgrade --database-url ...`` command.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import sys
from typing import Any

from boundsvc.settings import DEFAULT_DATABASE_URL


def database_url(args: argparse.Namespace) -> str:
    """``--database-url``, else ``BOUNDSVC_DATABASE_URL``, else the embedded SQLite default."""
    return str(args.database_url or os.environ.get("BOUNDSVC_DATABASE_URL") or DEFAULT_DATABASE_URL)


def add_database_url(parser: argparse.ArgumentParser) -> None:
    """The ``--database-url`` option every database command takes."""
    parser.add_argument(
        "--database-url",
        default=None,
        help=f"SQLAlchemy URL (default: $BOUNDSVC_DATABASE_URL, else {DEFAULT_DATABASE_URL})",
    )


def _status_json(status: Any) -> dict[str, Any]:
    return {
        "state": status.state,
        "current": status.current,
        "head": status.head,
        "url": status.url,
        "up_to_date": status.up_to_date,
        "command": None if status.up_to_date else status.command,
    }


def _upgrade(args: argparse.Namespace) -> int:
    from boundsvc.store import StoreError, schema_status, upgrade

    url = database_url(args)
    try:
        before = schema_status(url)
        if before.state == "ahead":
            print(f"boundsvc: {before.message}", file=sys.stderr)
            return 2
        upgrade(url)
        after = schema_status(url)
    except (StoreError, ValueError) as exc:
        print(f"boundsvc: error: {exc}", file=sys.stderr)
        return 2
    if args.json:
        print(json.dumps({"before": _status_json(before), "after": _status_json(after)}))
    elif before.up_to_date:
        print(f"database {after.url} is already at revision {after.head}; nothing to do")
    else:
        print(
            f"database {after.url} upgraded from {before.current or '(empty)'} "
            f"to revision {after.current}"
        )
    return 0


def _status(args: argparse.Namespace) -> int:
    from boundsvc.store import StoreError, schema_status

    try:
        status = schema_status(database_url(args))
    except (StoreError, ValueError) as exc:
        print(f"boundsvc: error: {exc}", file=sys.stderr)
        return 2
    if args.json:
        print(json.dumps(_status_json(status)))
    else:
        print(f"{status.state}: {status.message}")
    return 0 if status.up_to_date else 1


def _cutoff(args: argparse.Namespace) -> dt.datetime | None:
    """``now - --older-than``, or None after printing why the duration is refused."""
    from boundsvc.cli._common import UsageError
    from boundsvc.cli.gate import parse_duration

    try:
        seconds = parse_duration(args.older_than)
    except UsageError:
        print(
            f"boundsvc db {args.db_command}: --older-than {args.older_than!r}: expected a "
            "duration like 7d, 12h, 1d12h, 90m",
            file=sys.stderr,
        )
        return None
    return dt.datetime.now(dt.UTC) - dt.timedelta(seconds=seconds)


def _purge(args: argparse.Namespace, what: str) -> int:
    from boundsvc.settings import Settings
    from boundsvc.store import StoreError, open_store

    cutoff = _cutoff(args)
    if cutoff is None:
        return 2
    if what == "idempotency":
        # a claim younger than the stale limit may belong to a request that still runs:
        # deleting it would let a retry run the request a second time
        stale = Settings.from_env().idempotency_stale_seconds
        if cutoff > dt.datetime.now(dt.UTC) - dt.timedelta(seconds=stale):
            print(
                f"boundsvc db {args.db_command}: --older-than must be at least "
                f"BOUNDSVC_IDEMPOTENCY_STALE_SECONDS ({stale:g} s)",
                file=sys.stderr,
            )
            return 2
    try:
        store = open_store(database_url(args), create=False)
        try:
            if what == "idempotency":
                deleted = store.purge_idempotency_keys(cutoff)
            else:
                deleted = store.purge_archives(cutoff)
        finally:
            store.dispose()
    except (StoreError, ValueError) as exc:
        print(f"boundsvc: error: {exc}", file=sys.stderr)
        return 2
    noun = "idempotency keys last updated" if what == "idempotency" else "residual archives stored"
    if args.json:
        print(json.dumps({"deleted": deleted, "what": what, "before": cutoff.isoformat()}))
    else:
        print(f"deleted {deleted} {noun} before {cutoff.isoformat(timespec='seconds')}")
    return 0


def register(sub: Any) -> None:
    """Add ``db upgrade`` and ``db status`` (exit 0 only when the schema is at head)."""
    db = sub.add_parser("db", help="manage the database schema")
    actions = db.add_subparsers(dest="db_command", required=True)
    up = actions.add_parser("upgrade", help="migrate the database to the current schema")
    add_database_url(up)
    up.add_argument("--json", action="store_true", help="machine-readable output")
    up.set_defaults(func=_upgrade)
    st = actions.add_parser(
        "status", help="compare the database with this boundsvc (exit 1 when it is not up to date)"
    )
    add_database_url(st)
    st.add_argument("--json", action="store_true", help="machine-readable output")
    st.set_defaults(func=_status)
    for name, what, helptext in (
        (
            "purge-idempotency",
            "idempotency",
            "delete Idempotency-Key records last updated before --older-than (retries of "
            "those requests then run again)",
        ),
        (
            "purge-archives",
            "archives",
            "delete residual archives stored before --older-than (their certificates stay, "
            "but can no longer be re-verified)",
        ),
    ):
        purge = actions.add_parser(name, help=helptext, description=helptext)
        add_database_url(purge)
        purge.add_argument(
            "--older-than", required=True, metavar="DURATION", help="e.g. 7d, 12h, 1d12h, 90m, 2w"
        )
        purge.add_argument("--json", action="store_true", help="machine-readable output")
        purge.set_defaults(func=lambda args, what=what: _purge(args, what))
