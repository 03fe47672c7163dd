"""``boundsvc serve``: run the HTTP service (uvicorn; several workers by the usual means).

With ``--workers N > 1`` (or ``PROMETHEUS_MULTIPROC_DIR`` / ``--metrics-dir`` set) request
metrics go to prometheus_client's multiprocess files, so that every worker's ``/metrics``
sums all workers.  ``serve`` prepares that directory before any worker starts: it creates it
and deletes the ``*.db`` files a previous run left behind (their counts would be added to
this run's, and files of dead workers would never go away).  Without a configured directory
N > 1 workers get a fresh temporary one, removed when the service stops.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
from collections.abc import MutableMapping
from pathlib import Path
from typing import Any

#: The variable prometheus_client reads at import (``boundsvc.api.metrics.MULTIPROC_ENV``);
#: spelled out here because importing the metrics module would import prometheus_client in
#: this process before the variable is set.
MULTIPROC_ENV = "PROMETHEUS_MULTIPROC_DIR"


def prepare_metrics_dir(path: Path) -> int:
    """Create ``path`` (and its parents) and delete stale metric files; return how many.

    Only prometheus_client's ``*.db`` files are deleted, nothing else in the directory.
    Raises ``ValueError`` when ``path`` exists and is not a directory, ``OSError`` when it
    cannot be created or cleaned.
    """
    if path.exists() and not path.is_dir():
        raise ValueError(f"the metrics directory {path} exists and is not a directory")
    path.mkdir(parents=True, exist_ok=True)
    removed = 0
    for stale in sorted(path.glob("*.db")):
        if stale.is_file():
            stale.unlink()
            removed += 1
    return removed


def metrics_dir_for(
    args: argparse.Namespace, env: MutableMapping[str, str]
) -> tuple[Path | None, bool]:
    """The multiprocess metrics directory to use and whether it is a temporary one."""
    configured = args.metrics_dir or env.get(MULTIPROC_ENV)
    if configured:
        return Path(configured), False
    if args.workers > 1:
        return Path(tempfile.mkdtemp(prefix="boundsvc-metrics-")), True
    return None, False


def _serve(args: argparse.Namespace) -> int:
    import uvicorn

    if args.workers < 1:
        print("boundsvc serve: --workers must be at least 1", file=sys.stderr)
        return 2
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # spinning BLAS threads: perf notes
    if args.database_url:
        os.environ["BOUNDSVC_DATABASE_URL"] = args.database_url
    os.environ["BOUNDSVC_HOST"] = args.host
    os.environ["BOUNDSVC_PORT"] = str(args.port)
    metrics_dir, temporary = metrics_dir_for(args, os.environ)
    if metrics_dir is not None:
        try:
            removed = prepare_metrics_dir(metrics_dir)
        except (OSError, ValueError) as exc:
            print(f"boundsvc serve: cannot prepare the metrics directory: {exc}", file=sys.stderr)
            return 2
        os.environ[MULTIPROC_ENV] = str(metrics_dir)  # inherited by every worker
    from boundsvc.settings import get_settings
    from boundsvc.store import open_store

    get_settings.cache_clear()
    settings = get_settings()
    # Create (embedded SQLite) or check the schema once, before any worker starts.
    open_store(settings.database_url).dispose()
    metrics_note = ""
    if metrics_dir is not None:
        metrics_note = f", metrics in {metrics_dir}" + (
            f" ({removed} stale file(s) removed)" if removed else ""
        )
    print(
        f"boundsvc serving on http://{args.host}:{args.port} "
        f"(database {settings.database_url}, {args.workers} worker(s){metrics_note})",
        flush=True,
    )
    try:
        uvicorn.run(
            "boundsvc.api.asgi:create_app",
            factory=True,
            host=args.host,
            port=args.port,
            workers=args.workers,
            log_level=args.log_level,
            access_log=False,
        )
    finally:
        if temporary and metrics_dir is not None:
            os.environ.pop(MULTIPROC_ENV, None)
            shutil.rmtree(metrics_dir, ignore_errors=True)
    return 0


def register(sub: Any) -> None:
    serve = sub.add_parser("serve", help="run the HTTP service")
    serve.add_argument("--host", default=os.environ.get("BOUNDSVC_HOST", "127.0.0.1"))
    serve.add_argument("--port", type=int, default=int(os.environ.get("BOUNDSVC_PORT", "8000")))
    serve.add_argument("--workers", type=int, default=1)
    serve.add_argument("--database-url", default=None)
    serve.add_argument("--log-level", default="warning")
    serve.add_argument(
        "--metrics-dir",
        default=None,
        help=f"directory of the workers' metric files (default ${MULTIPROC_ENV}; with "
        "--workers > 1 and neither set, a temporary directory); created, and emptied of "
        "stale *.db files, at start",
    )
    serve.set_defaults(func=_serve)
