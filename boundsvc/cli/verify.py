"""``boundsvc verify ID``: recompute a stored certificate from its residual archive.

Exit codes, as ``boundsvc gate``: 0 the recomputation matches the stored certificate; 1 it
does not, or it cannot be re-verified (no such certificate, no archive: ``not_archived``,
a damaged archive: ``archive_corrupt``); 2 usage error; 3 the service is unreachable, refuses
our credentials (verify needs the ``read`` scope) or failed internally. ``--json``
writes the service's report (or ``{"error": ...}``) on stdout.
"""

from __future__ import annotations

import argparse
import math
from typing import TYPE_CHECKING, Any

from boundsvc.cli._common import (
    EXIT_FAIL,
    EXIT_OK,
    UsageError,
    connection_options,
    dump_model,
    emit_json,
    fmt,
    run_remote,
)

if TYPE_CHECKING:  # imported on use: `boundsvc serve` must not need httpx
    from api_schemas import VerificationReport
    from boundsvc.client import BoundsvcClient

#: Differences printed in the text output (``--json`` has the service's full list).
SHOWN_DIFFERENCES = 20


def _value(value: Any) -> str:
    if isinstance(value, float):
        return fmt(value, 12)
    text = repr(value) if not isinstance(value, dict | list) else f"<{type(value).__name__}>"
    return text if len(text) <= 60 else text[:57] + "..."


def report_lines(report: VerificationReport) -> list[str]:
    """The verdict, the bounds side by side, and the first differences."""
    verdict = "matches" if report.matches else "DOES NOT MATCH"
    lines = [
        f"certificate {report.certificate_id}: {verdict} its recomputation "
        f"(stored by boundsvc {report.stored_service_version or '?'}, recomputed by "
        f"{report.running_service_version}; rtol {report.rtol:g})"
    ]
    stored = report.stored_bound if isinstance(report.stored_bound, dict) else {}
    recomputed = report.recomputed_bound or {}
    for key in ("l2_space_time", "l2_final_time", "l2_space"):
        if key in stored or key in recomputed:
            a, b = stored.get(key), recomputed.get(key)
            lines.append(
                f"  {key}: stored {fmt(a if isinstance(a, float) else None, 8)}   "
                f"recomputed {fmt(b, 8)}"
            )
    if report.error is not None:
        lines.append(
            f"  the running version refused to recompute it: {report.error.code}: "
            f"{report.error.detail}"
        )
    if report.differences_total:
        lines.append(f"  differences ({report.differences_total}):")
        for diff in report.differences[:SHOWN_DIFFERENCES]:
            lines.append(
                f"    {diff.path} ({diff.kind}): {_value(diff.stored)} -> {_value(diff.recomputed)}"
            )
        if report.differences_total > SHOWN_DIFFERENCES:
            lines.append(f"    ... {report.differences_total - SHOWN_DIFFERENCES} more (--json)")
    elif report.matches and not report.byte_identical:
        lines.append(
            f"  numbers agree within rtol (largest relative difference "
            f"{report.max_relative_difference:.2g})"
        )
    lines.append(
        f"  archive {report.archive.codec}, {report.archive.size_bytes} bytes, "
        f"sha256 {report.archive.sha256[:16]}..."
    )
    return lines


def _verify(args: argparse.Namespace, client: BoundsvcClient) -> int:
    """Recompute a certificate from its archive; exit 0 when it matches."""
    if args.rtol is not None and not (math.isfinite(args.rtol) and 0 <= args.rtol <= 1):
        raise UsageError(f"--rtol must be between 0 and 1, got {args.rtol}")
    try:
        report = client.verify(args.certificate_id, rtol=args.rtol)
    except ValueError as exc:  # an id the client refuses to put in a path
        raise UsageError(str(exc)) from exc
    if args.json:
        emit_json(dump_model(report))
    else:
        print("\n".join(report_lines(report)))
    return EXIT_OK if report.matches else EXIT_FAIL


def register(sub: Any) -> None:
    p = sub.add_parser(
        "verify",
        parents=[connection_options()],
        help="recompute a stored certificate from its residual archive (exit 0: it matches)",
        description=__doc__,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("certificate_id", metavar="ID", help="the certificate id (crt_...)")
    p.add_argument(
        "--rtol",
        type=float,
        default=None,
        help="relative tolerance for numbers (default: the service's, 1e-12; 0: exact)",
    )
    p.set_defaults(func=run_remote(_verify))
