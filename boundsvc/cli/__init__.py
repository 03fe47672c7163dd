"""The ``boundsvc`` command line: one module per group of subcommands.

Each module exposes ``register(subparsers)``; the subcommand's function returns the exit code.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from boundsvc.cli import db, gate, keys, remote, report, serve, verify

# report after remote: it extends its command
_MODULES = [serve, db, keys, remote, gate, verify, report]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="boundsvc", description="Certificates of error bounds for PDE surrogates."
    )
    sub = parser.add_subparsers(dest="command", required=True)
    for module in _MODULES:
        module.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        result: int = args.func(args)
    except Exception as exc:
        # A schema behind (or a database down) at start-up is an operator's problem, not a
        # bug: print the message, which names the fix, instead of a traceback.
        from boundsvc.store import SchemaOutOfDate, StoreUnavailable

        if not isinstance(exc, SchemaOutOfDate | StoreUnavailable):
            raise
        print(f"boundsvc: error: {exc}", file=sys.stderr)
        return 2
    return result


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
