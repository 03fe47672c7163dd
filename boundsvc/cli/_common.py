"""What the commands that call a service share: options, the client, exit codes, output.

Exit codes (every remote command, and ``boundsvc gate``):

* 0: done (the gate: passed);
* 1: the service refused or the answer is negative (a 4xx such as an invalid problem or an
  unknown id; the gate: failed);
* 2: usage error (bad options, unreadable input files);
* 3: the service is unreachable, overloaded, misconfigured for us (401/403) or failed (5xx).
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import sys
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any, TextIO

import numpy as np

from api_schemas import Certificate

if TYPE_CHECKING:  # the client (httpx) is imported when a remote command runs, so that
    # `boundsvc serve` works in a server-only install
    from boundsvc.client import BoundsvcClient, BoundsvcClientError

EXIT_OK = 0
EXIT_FAIL = 1
EXIT_USAGE = 2
EXIT_SERVICE = 3


class UsageError(Exception):
    """Bad options or input files (exit code 2)."""


def connection_options() -> argparse.ArgumentParser:
    """A parent parser with ``--url``, ``--timeout``, ``--retries`` and ``--json``."""
    parent = argparse.ArgumentParser(add_help=False)
    group = parent.add_argument_group("service")
    group.add_argument(
        "--url",
        default=None,
        help="service URL (default $BOUNDSVC_URL, else http://127.0.0.1:8000); "
        "the API key is read from $BOUNDSVC_API_KEY",
    )
    group.add_argument(
        "--timeout", type=float, default=120.0, help="seconds to wait for an answer (default 120)"
    )
    group.add_argument(
        "--retries",
        type=int,
        default=3,
        help="retries on connection errors, 429 and 502-504 (default 3)",
    )
    parent.add_argument("--json", action="store_true", help="machine-readable output on stdout")
    return parent


def _default_factory(args: argparse.Namespace) -> BoundsvcClient:
    from boundsvc.client import BoundsvcClient, RetryPolicy

    if args.retries < 0:
        raise UsageError("--retries must be >= 0")
    if not args.timeout > 0:
        raise UsageError("--timeout must be positive")
    try:
        return BoundsvcClient(
            args.url, timeout=args.timeout, retries=RetryPolicy(max_retries=args.retries)
        )
    except ValueError as exc:
        raise UsageError(str(exc)) from exc


#: How commands get their client; tests replace it with one bound to an in-process app.
CLIENT_FACTORY: Callable[[argparse.Namespace], BoundsvcClient] = _default_factory


def make_client(args: argparse.Namespace) -> BoundsvcClient:
    return CLIENT_FACTORY(args)


def service_exit_code(exc: BoundsvcClientError) -> int:
    """1 for an answer about the input, 3 for anything that says the service is not usable."""
    if exc.status is None or exc.status >= 500 or exc.status in (401, 403, 429):
        return EXIT_SERVICE
    return EXIT_FAIL


def error_json(exc: BoundsvcClientError) -> dict[str, Any]:
    return {
        "status": exc.status,
        "code": exc.code,
        "detail": exc.detail,
        "errors": [e.model_dump() for e in exc.errors],
        "request_id": exc.request_id,
    }


def run_remote(
    body: Callable[[argparse.Namespace, BoundsvcClient], int],
) -> Callable[[argparse.Namespace], int]:
    """Wrap a command: make the client, map client errors and usage errors to exit codes."""

    def command(args: argparse.Namespace) -> int:
        from boundsvc.client import BoundsvcClientError

        try:
            client = make_client(args)
            with client:
                return body(args, client)
        except UsageError as exc:
            print(f"boundsvc {args.command}: {exc}", file=sys.stderr)
            return EXIT_USAGE
        except BoundsvcClientError as exc:
            if getattr(args, "json", False):
                emit_json({"error": error_json(exc)})
            print(f"boundsvc {args.command}: {exc}", file=sys.stderr)
            return service_exit_code(exc)

    command.__doc__ = body.__doc__
    return command


# -- input files -------------------------------------------------------------------


def read_json(path: str, what: str) -> Any:
    try:
        text = Path(path).read_text()
    except OSError as exc:
        raise UsageError(f"cannot read the {what} file {path}: {exc.strerror}") from exc
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise UsageError(f"{path} is not valid JSON ({exc.msg}, line {exc.lineno})") from exc


def read_problem(path: str) -> dict[str, Any]:
    """A problem file: the problem object itself, or ``{"problem": {...}}``."""
    data = read_json(path, "problem")
    if isinstance(data, dict) and isinstance(data.get("problem"), dict):
        data = data["problem"]
    if not isinstance(data, dict):
        raise UsageError(f"{path}: a problem file holds a JSON object")
    return data


def read_regularity(path: str) -> dict[str, float | str]:
    """A regularity file: ``{"sup_abs_u_x": 3.2, ...}`` or ``{"regularity": {...}}``."""
    data = read_json(path, "regularity")
    if isinstance(data, dict) and isinstance(data.get("regularity"), dict):
        data = data["regularity"]
    if not isinstance(data, dict):
        raise UsageError(f"{path}: a regularity file holds a JSON object of key -> value")
    for key, value in data.items():
        if isinstance(value, bool) or not isinstance(value, int | float | str):
            raise UsageError(
                f"{path}: regularity[{key!r}] must be a number or an expression string in t"
            )
    return data


def read_residuals(path: str) -> dict[str, np.ndarray]:
    """Residual arrays per component from ``.npz`` (no pickles) or ``.json``."""
    source = Path(path)
    if not source.is_file():
        raise UsageError(f"no residuals file {path}")
    if source.suffix.lower() == ".json":
        data = read_json(path, "residuals")
        if isinstance(data, dict) and isinstance(data.get("residuals"), dict):
            data = data["residuals"]
        if not isinstance(data, dict):
            raise UsageError(f"{path}: expected an object of component -> list of numbers")
        try:
            return {str(k): np.asarray(v, dtype=np.float64) for k, v in data.items()}
        except (TypeError, ValueError) as exc:
            raise UsageError(f"{path}: residuals must be lists of numbers ({exc})") from exc
    try:
        with np.load(source, allow_pickle=False) as npz:
            arrays = {name: np.asarray(npz[name]) for name in npz.files}
    except (OSError, ValueError) as exc:
        raise UsageError(f"{path}: not a readable .npz of arrays ({exc})") from exc
    for name, arr in arrays.items():
        if not np.issubdtype(arr.dtype, np.number):
            raise UsageError(f"{path}: array {name!r} has dtype {arr.dtype}, not numbers")
    return {name: arr.astype(np.float64) for name, arr in arrays.items()}


def parse_counts(text: str, what: str) -> dict[str, int]:
    """``"t=32,x=32"`` -> ``{"t": 32, "x": 32}``."""
    out: dict[str, int] = {}
    for item in filter(None, (p.strip() for p in text.split(","))):
        axis, sep, value = item.partition("=")
        if not sep or not axis.strip() or not value.strip().isdigit():
            raise UsageError(f"{what}: expected axis=count pairs like t=32,x=32, got {item!r}")
        out[axis.strip()] = int(value)
    if not out:
        raise UsageError(f"{what}: give at least one axis=count")
    return out


# -- output ------------------------------------------------------------------------


def emit_json(obj: Any, stream: TextIO | None = None) -> None:
    out = stream or sys.stdout
    out.write(json.dumps(obj, indent=2, sort_keys=False, default=str) + "\n")


def fmt(value: float | None, digits: int = 4) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "n/a"
    return f"{value:.{digits}g}"


def created_at(cert: Certificate) -> dt.datetime | None:
    try:
        when = dt.datetime.fromisoformat(cert.provenance.created_at)
    except ValueError:
        return None
    return when if when.tzinfo is not None else when.replace(tzinfo=dt.UTC)


def format_age(seconds: float) -> str:
    seconds = max(0.0, seconds)
    for unit, size in (("d", 86400), ("h", 3600), ("m", 60)):
        if seconds >= size:
            return f"{seconds / size:.1f}{unit}"
    return f"{seconds:.0f}s"


def model_label(cert: Certificate) -> str:
    m = cert.model
    if m is None or (m.name is None and m.version is None):
        return "no model metadata"
    text = f"model {m.name or '?'}"
    if m.version:
        text += f" {m.version}"
    if m.epoch is not None:
        text += f" (epoch {m.epoch})"
    return text


def certificate_summary(cert: Certificate) -> list[str]:
    """A few lines: id, status, bounds, model."""
    b = cert.bound
    return [
        f"certificate {cert.id}  status {cert.status}  rigor {cert.rigor or 'n/a'}",
        f"  family {cert.family}; {model_label(cert)}",
        f"  L2 error bound, space-time: {fmt(b.l2_space_time)}   at final time: "
        f"{fmt(b.l2_final_time)}",
    ]


def certificate_details(cert: Certificate) -> list[str]:
    """Everything a reader needs: terms, constants, time profile, hypotheses, warnings."""
    lines = certificate_summary(cert)
    when = created_at(cert)
    lines.append(
        f"  created {cert.provenance.created_at}"
        + (f" ({format_age((dt.datetime.now(dt.UTC) - when).total_seconds())} ago)" if when else "")
    )
    if cert.vacuous_from is not None:
        lines.append(f"  vacuous from t = {fmt(cert.vacuous_from)}")
    prof = cert.time_profile
    if prof is not None and prof.t:
        picks = sorted(set(np.linspace(0, len(prof.t) - 1, min(6, len(prof.t))).astype(int)))
        lines.append(
            "  time profile: "
            + "  ".join(f"t={prof.t[i]:.3g}: {fmt(prof.l2_error_bound[i])}" for i in picks)
        )
    if cert.terms:
        lines.append("  terms:")
        for term in cert.terms:
            share = "" if term.share_final_time is None else f"{100 * term.share_final_time:5.1f}%"
            lines.append(f"    {term.name:<30} {fmt(term.value):>10}  {share:>6}  {term.rigor}")
    if cert.constants:
        lines.append("  constants:")
        for const in cert.constants:
            lines.append(
                f"    {const.symbol:<10} = {const.expression}   value {fmt(const.value)}"
                + (f"  [{const.rigor}]" if const.rigor else "")
            )
    if cert.regularity:
        lines.append("  regularity: " + ", ".join(f"{k}={v}" for k, v in cert.regularity.items()))
    if cert.hypotheses:
        lines.append("  hypotheses:")
        lines.extend(f"    - {h}" for h in cert.hypotheses)
    if cert.warnings:
        lines.append("  warnings:")
        lines.extend(f"    - {w}" for w in cert.warnings)
    lines.append(f"  theorem: {cert.provenance.theorem}")
    return lines


def dump_model(obj: Any) -> Any:
    """JSON-ready form of pydantic models (and mappings of them)."""
    if hasattr(obj, "model_dump"):
        return obj.model_dump(mode="json")
    if isinstance(obj, Mapping):
        return {k: dump_model(v) for k, v in obj.items()}
    return obj
