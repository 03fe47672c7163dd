"""``boundsvc report ID --out DIR``: a certificate's report as files (HTML, PNG, SVG, JSON).

The certificate comes from the service (``--url`` / ``$BOUNDSVC_URL``, key from
``$BOUNDSVC_API_KEY``) or, with ``--database-url``, straight from a local store. The HTML is
standalone (CSS inlined, formulas as embedded SVG, the plot beside it as ``plot.png``), so the
directory can be archived or attached to a model card.

Without ``--out``/``--database-url`` the command keeps the older behaviour of ``boundsvc report``
(print or save the service's rendered page) when :mod:`boundsvc.cli.remote` registered it.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from boundsvc.cli._common import (
    EXIT_FAIL,
    EXIT_OK,
    EXIT_USAGE,
    UsageError,
    connection_options,
    emit_json,
    run_remote,
)
from boundsvc.client import BoundsvcClient

FILES = ("report.html", "plot.png", "plot.svg", "certificate.json")


def write_report(doc: dict[str, Any], out_dir: Path) -> list[Path]:
    """Write the report files of one certificate document into ``out_dir``."""
    from boundsvc.reports import certificate_plot, render_certificate_report

    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise UsageError(f"cannot create {out_dir}: {exc.strerror}") from exc
    html = render_certificate_report(doc, plot_png="plot.png", plot_svg="plot.svg", standalone=True)
    contents: dict[str, bytes] = {
        "report.html": html.encode("utf-8"),
        "plot.png": certificate_plot(doc, "png"),
        "plot.svg": certificate_plot(doc, "svg"),
        "certificate.json": json.dumps(doc, indent=2).encode("utf-8"),
    }
    paths = []
    for name in FILES:
        path = out_dir / name
        path.write_bytes(contents[name])
        paths.append(path)
    return paths


def _local_document(args: argparse.Namespace) -> dict[str, Any] | None:
    from boundsvc.store import open_store

    try:
        store = open_store(args.database_url, create=False)
    except ValueError as exc:
        raise UsageError(str(exc)) from exc
    try:
        stored = store.get_certificate(args.id, args.project)
    finally:
        store.dispose()
    return None if stored is None else dict(json.loads(stored.document))


def _finish(args: argparse.Namespace, doc: dict[str, Any] | None) -> int:
    if doc is None:
        message = f"no certificate with id {args.id!r}"
        if args.json:
            emit_json({"error": {"code": "certificate_not_found", "detail": message}})
        print(f"boundsvc report: {message}", file=sys.stderr)
        return EXIT_FAIL
    out_dir = Path(args.out_dir or f"report-{args.id}")
    paths = write_report(doc, out_dir)
    if args.json:
        emit_json(
            {
                "certificate_id": args.id,
                "status": doc.get("status"),
                "files": [str(p) for p in paths],
            }
        )
    else:
        print(
            f"report of {args.id} ({doc.get('status')}) written to {out_dir}/: "
            + ", ".join(p.name for p in paths)
        )
    return EXIT_OK


def _remote(args: argparse.Namespace, client: BoundsvcClient) -> int:
    """Fetch a certificate from the service and write its report files."""
    return _finish(args, client.certificate(args.id).model_dump(mode="json"))


def _report_files(args: argparse.Namespace) -> int:
    if args.database_url:
        try:
            return _finish(args, _local_document(args))
        except UsageError as exc:
            print(f"boundsvc report: {exc}", file=sys.stderr)
            return EXIT_USAGE
    return run_remote(_remote)(args)


def _add_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("report files")
    group.add_argument(
        "--out",
        dest="out_dir",
        metavar="DIR",
        help="write report.html, plot.png, plot.svg and certificate.json here "
        "(default report-ID with --database-url)",
    )
    group.add_argument(
        "--database-url",
        default=None,
        help="read the certificate from this store instead of the service",
    )
    group.add_argument(
        "--project", default=None, help="with --database-url: only a certificate of this project"
    )


def register(sub: Any) -> None:
    existing: argparse.ArgumentParser | None = sub.choices.get("report")
    if existing is None:
        p = sub.add_parser(
            "report",
            parents=[connection_options()],
            help="write a certificate's report (HTML, PNG, SVG)",
        )
        p.add_argument("id")
        _add_options(p)
        p.set_defaults(func=_report_files)
        return
    # `boundsvc report` already prints the service's page: --out/--database-url add files
    _add_options(existing)
    fetch_page: Callable[[argparse.Namespace], int] = existing.get_default("func")

    def command(args: argparse.Namespace) -> int:
        if args.out_dir or args.database_url:
            return _report_files(args)
        return fetch_page(args)

    existing.set_defaults(func=command)
