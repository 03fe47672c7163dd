"""``boundsvc gate``: pass or fail a model in a registry or CI job on its newest certificate.

Exit codes: 0 pass, 1 fail (a check failed, or there is no such certificate), 2 usage error,
3 the service is unreachable, refuses our credentials, or failed internally. ``--json`` writes a
machine-readable verdict on stdout in every case.
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
import re
import sys
from dataclasses import asdict, dataclass
from typing import Any

from api_schemas import Certificate
from boundsvc.cli._common import (
    EXIT_FAIL,
    EXIT_OK,
    EXIT_SERVICE,
    EXIT_USAGE,
    UsageError,
    connection_options,
    created_at,
    emit_json,
    error_json,
    format_age,
    make_client,
    model_label,
    service_exit_code,
)

STATUSES = ("valid", "vacuous", "invalid-hypotheses", "any")
_UNITS = {"s": 1.0, "m": 60.0, "h": 3600.0, "d": 86400.0, "w": 604800.0}
_DURATION = re.compile(r"(\d+(?:\.\d+)?)([smhdw])")


def parse_duration(text: str) -> float:
    """Seconds in ``"7d"``, ``"12h"``, ``"1d12h"``, ``"90m"``, ``"2w"``, ``"30s"``."""
    compact = text.strip().lower().replace(" ", "")
    parts = _DURATION.findall(compact)
    if not compact or "".join(n + u for n, u in parts) != compact:
        raise UsageError(f"--max-age {text!r}: expected a duration like 7d, 12h, 1d12h, 90m")
    return sum(float(n) * _UNITS[u] for n, u in parts)


@dataclass(frozen=True)
class Thresholds:
    """What a certificate must satisfy (``None``: not checked)."""

    max_l2: float | None = None
    max_final: float | None = None
    require_status: str = "valid"
    max_age_seconds: float | None = None

    def __post_init__(self) -> None:
        for name in ("max_l2", "max_final", "max_age_seconds"):
            value = getattr(self, name)
            if value is not None and not (math.isfinite(value) and value >= 0):
                raise UsageError(
                    f"--{name.replace('_seconds', '').replace('_', '-')} must be a "
                    f"finite number >= 0, got {value}"
                )
        if self.require_status not in STATUSES:
            raise UsageError(f"--require-status must be one of {', '.join(STATUSES)}")
        if (
            self.require_status == "any"
            and self.max_l2 is None
            and self.max_final is None
            and self.max_age_seconds is None
        ):
            raise UsageError(
                "nothing to check: give --max-l2, --max-final, --max-age or a "
                "--require-status other than 'any'"
            )


@dataclass(frozen=True)
class Check:
    """One line of the verdict."""

    name: str
    required: str
    actual: str
    passed: bool
    #: the raw numbers (seconds for the age) or statuses, for machines
    value: float | str | None = None
    limit: float | str | None = None


def _bound_check(name: str, value: float | None, limit: float) -> Check:
    if value is None:
        return Check(name, f"<= {limit:g}", "no finite bound", False, None, limit)
    return Check(name, f"<= {limit:g}", f"{value:.4g}", value <= limit, value, limit)


def evaluate(
    cert: Certificate, thresholds: Thresholds, now: dt.datetime | None = None
) -> list[Check]:
    """The checks of ``thresholds`` on ``cert`` (pure: no service involved)."""
    checks: list[Check] = []
    if thresholds.require_status != "any":
        checks.append(
            Check(
                "status",
                thresholds.require_status,
                cert.status,
                cert.status == thresholds.require_status,
                cert.status,
                thresholds.require_status,
            )
        )
    if thresholds.max_l2 is not None:
        checks.append(
            _bound_check("L2 space-time bound", cert.bound.l2_space_time, thresholds.max_l2)
        )
    if thresholds.max_final is not None:
        checks.append(
            _bound_check("L2 final-time bound", cert.bound.l2_final_time, thresholds.max_final)
        )
    if thresholds.max_age_seconds is not None:
        limit = f"<= {format_age(thresholds.max_age_seconds)}"
        when = created_at(cert)
        if when is None:
            checks.append(
                Check(
                    "age", limit, "unknown creation time", False, None, thresholds.max_age_seconds
                )
            )
        else:
            age = ((now or dt.datetime.now(dt.UTC)) - when).total_seconds()
            checks.append(
                Check(
                    "age",
                    limit,
                    format_age(age),
                    age <= thresholds.max_age_seconds,
                    age,
                    thresholds.max_age_seconds,
                )
            )
    return checks


def _verdict(verdict: str, code: int, **extra: Any) -> dict[str, Any]:
    return {"verdict": verdict, "exit_code": code, **extra}


def _cert_json(cert: Certificate) -> dict[str, Any]:
    return {
        "id": cert.id,
        "status": cert.status,
        "family": cert.family,
        "bound": cert.bound.model_dump(mode="json"),
        "model": cert.model.model_dump(mode="json") if cert.model else None,
        "created_at": cert.provenance.created_at,
        "rigor": cert.rigor,
        "warnings": len(cert.warnings),
    }


def _print_verdict(cert: Certificate, checks: list[Check], passed: bool) -> None:
    print(f"boundsvc gate: {'PASS' if passed else 'FAIL'}")
    print(f"  certificate {cert.id}  {model_label(cert)}")
    print(f"  family {cert.family}; created {cert.provenance.created_at}")
    for c in checks:
        print(f"  [{'pass' if c.passed else 'FAIL'}] {c.name}: {c.actual} (required {c.required})")
    loose = sorted({t.rigor for t in cert.terms if t.rigor != "proven"})
    if loose:
        print(
            f"  note: the bound rests on {', '.join(loose)} ingredients (rigor "
            f"{cert.rigor or 'n/a'}); see `boundsvc show {cert.id}`"
        )
    if cert.warnings:
        print(f"  {len(cert.warnings)} warning(s): `boundsvc show {cert.id}`")


def _gate(args: argparse.Namespace) -> int:
    from boundsvc.client import BoundsvcClientError

    as_json = bool(args.json)
    selector = (
        {"certificate_id": args.id} if args.id else {"model": args.model, "version": args.version}
    )
    try:
        if (args.id is None) == (args.model is None):
            raise UsageError("give a certificate ID or --model NAME [--version V], not both")
        if args.version is not None and args.model is None:
            raise UsageError("--version needs --model")
        thresholds = Thresholds(
            max_l2=args.max_l2,
            max_final=args.max_final,
            require_status=args.require_status,
            max_age_seconds=parse_duration(args.max_age) if args.max_age else None,
        )
        client = make_client(args)
    except UsageError as exc:
        if as_json:
            emit_json(_verdict("usage-error", EXIT_USAGE, reason=str(exc), selector=selector))
        print(f"boundsvc gate: {exc}", file=sys.stderr)
        return EXIT_USAGE
    try:
        with client:
            cert = (
                client.certificate(args.id)
                if args.id
                else client.latest_certificate(args.model, args.version)
            )
    except BoundsvcClientError as exc:
        code = service_exit_code(exc)
        if code == EXIT_FAIL and exc.status == 404:
            reason = f"no certificate {args.id!r} on {client.base_url}"
            verdict = "fail"
        elif code == EXIT_FAIL:
            reason, verdict = f"the service refused the query: {exc.detail}", "fail"
        else:
            reason, verdict = f"cannot consult the service: {exc.detail}", "error"
        if as_json:
            emit_json(
                _verdict(
                    verdict,
                    code,
                    reason=reason,
                    selector=selector,
                    service=client.base_url,
                    error=error_json(exc),
                )
            )
        print(
            f"boundsvc gate: {'FAIL' if code == EXIT_FAIL else 'ERROR'} - {reason}",
            file=sys.stderr if code == EXIT_SERVICE else sys.stdout,
        )
        return code
    if cert is None:
        what = f"model {args.model!r}" + (f" version {args.version!r}" if args.version else "")
        reason = f"no certificate for {what} on {client.base_url}"
        if as_json:
            emit_json(
                _verdict(
                    "fail",
                    EXIT_FAIL,
                    reason=reason,
                    selector=selector,
                    service=client.base_url,
                    checks=[],
                )
            )
        else:
            print(f"boundsvc gate: FAIL - {reason}")
        return EXIT_FAIL
    checks = evaluate(cert, thresholds)
    passed = all(c.passed for c in checks)
    code = EXIT_OK if passed else EXIT_FAIL
    if as_json:
        failed = [c.name for c in checks if not c.passed]
        emit_json(
            _verdict(
                "pass" if passed else "fail",
                code,
                selector=selector,
                service=client.base_url,
                certificate=_cert_json(cert),
                checks=[asdict(c) for c in checks],
                reason="all checks passed" if passed else f"failed: {', '.join(failed)}",
                evaluated_at=dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
            )
        )
    else:
        _print_verdict(cert, checks, passed)
    return code


def register(sub: Any) -> None:
    p = sub.add_parser(
        "gate",
        parents=[connection_options()],
        help="pass/fail a model on its certificate (exit 0 pass, 1 fail, 2 usage, 3 service)",
        description="Check a certificate (by id, or the newest of --model/--version) against "
        "thresholds. Exit 0 pass, 1 fail, 2 usage error, 3 service unreachable or "
        "internal error.",
    )
    p.add_argument("id", nargs="?", help="certificate id")
    p.add_argument("--model", help="newest certificate of this model name")
    p.add_argument("--version", help="... and this version")
    p.add_argument("--max-l2", type=float, help="maximum L2 space-time error bound")
    p.add_argument("--max-final", type=float, help="maximum L2 final-time error bound")
    p.add_argument(
        "--require-status",
        default="valid",
        choices=STATUSES,
        help="required certificate status (default valid; 'any' to skip)",
    )
    p.add_argument("--max-age", help="maximum certificate age, e.g. 7d, 12h, 1d12h")
    p.set_defaults(func=_gate)
