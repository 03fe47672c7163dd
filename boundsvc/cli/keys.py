"""``boundsvc keys create|list|revoke``: API keys, managed directly in the database.

The token is printed once by ``create`` and never stored (only a salted hash is).  These
commands need database access, not a running service; over HTTP an ``admin`` key can do the
same for its own project (``/v1/keys``).
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from boundsvc.cli.db import add_database_url, database_url

_SCOPES = ("read", "write", "admin")


def _scopes(text: str) -> list[str]:
    scopes = sorted({s.strip() for s in text.split(",") if s.strip()})
    unknown = [s for s in scopes if s not in _SCOPES]
    if not scopes or unknown:
        raise argparse.ArgumentTypeError(
            f"scopes must be a comma-separated subset of {','.join(_SCOPES)}, got {text!r}"
        )
    return scopes


def _open(args: argparse.Namespace) -> Any:
    from boundsvc.store import open_store

    return open_store(database_url(args))


def _record_json(record: Any) -> dict[str, Any]:
    return {
        "key_id": record.id,
        "project": record.project,
        "name": record.name,
        "scopes": list(record.scopes),
        "created_at": record.created_at.isoformat(),
        "revoked_at": record.revoked_at.isoformat() if record.revoked_at else None,
        "last_used_at": record.last_used_at.isoformat() if record.last_used_at else None,
    }


def _guarded(fn: Any) -> Any:
    """Turn store errors (schema behind, database down) into a message and exit code 2."""

    def run(args: argparse.Namespace) -> int:
        from boundsvc.store import StoreError

        try:
            result: int = fn(args)
        except (StoreError, ValueError) as exc:
            print(f"boundsvc: error: {exc}", file=sys.stderr)
            return 2
        return result

    return run


def _create(args: argparse.Namespace) -> int:
    store = _open(args)
    try:
        key_id, token = store.create_api_key(args.project, args.name, args.scopes)
    finally:
        store.dispose()
    if args.json:
        print(
            json.dumps(
                {
                    "key_id": key_id,
                    "token": token,
                    "project": args.project,
                    "name": args.name,
                    "scopes": args.scopes,
                }
            )
        )
    else:
        print(f"created key {key_id} for project {args.project!r} (scopes {','.join(args.scopes)})")
        print(f"token: {token}")
        print("the token is shown only now; store it in a secret manager", file=sys.stderr)
    return 0


def _list(args: argparse.Namespace) -> int:
    store = _open(args)
    try:
        records = store.list_api_keys(args.project)
    finally:
        store.dispose()
    if args.json:
        print(json.dumps([_record_json(r) for r in records]))
        return 0
    if not records:
        print("no API keys")
        return 0
    print(f"{'KEY ID':<16}  {'PROJECT':<20}  {'NAME':<20}  {'SCOPES':<16}  STATE")
    for r in records:
        state = f"revoked {r.revoked_at:%Y-%m-%d}" if r.revoked_at else "active"
        print(f"{r.id:<16}  {r.project:<20}  {r.name:<20}  {','.join(r.scopes):<16}  {state}")
    return 0


def _revoke(args: argparse.Namespace) -> int:
    store = _open(args)
    try:
        revoked = store.revoke_api_key(args.key_id)
    finally:
        store.dispose()
    if args.json:
        print(json.dumps({"key_id": args.key_id, "revoked": revoked}))
    elif revoked:
        print(f"revoked key {args.key_id}")
    else:
        print(f"boundsvc: no active key {args.key_id!r}", file=sys.stderr)
    return 0 if revoked else 1


def register(sub: Any) -> None:
    """Add ``keys create``, ``keys list`` and ``keys revoke`` (exit 1: no such active key)."""
    keys = sub.add_parser("keys", help="manage API keys")
    actions = keys.add_subparsers(dest="keys_command", required=True)
    create = actions.add_parser("create", help="create a key and print its token once")
    create.add_argument("--project", required=True)
    create.add_argument("--name", required=True)
    create.add_argument(
        "--scopes",
        type=_scopes,
        default=["read"],
        help="comma-separated: read,write,admin (default read)",
    )
    listing = actions.add_parser("list", help="list keys (revoked ones too)")
    listing.add_argument("--project", default=None)
    revoke = actions.add_parser("revoke", help="revoke a key by its id")
    revoke.add_argument("key_id")
    for parser, fn in ((create, _create), (listing, _list), (revoke, _revoke)):
        add_database_url(parser)
        parser.add_argument("--json", action="store_true", help="machine-readable output")
        parser.set_defaults(func=_guarded(fn))
