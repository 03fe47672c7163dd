"""``boundsvc serve``: run the HTTP service (uvicorn; several workers by the usual means)."""

from __future__ import annotations

import argparse
import os
from typing import Any


def _serve(args: argparse.Namespace) -> int:
    import uvicorn

    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # spinning BLAS threads: perf notes
    if args.database_url:
        os.environ["BOUNDSVC_DATABASE_URL"] = args.database_url
    os.environ["BOUNDSVC_HOST"] = args.host
    os.environ["BOUNDSVC_PORT"] = str(args.port)
    from boundsvc.settings import get_settings
    from boundsvc.store import open_store

    get_settings.cache_clear()
    settings = get_settings()
    # Create (embedded SQLite) or check the schema once, before any worker starts.
    open_store(settings.database_url).dispose()
    print(
        f"boundsvc serving on http://{args.host}:{args.port} "
        f"(database {settings.database_url}, {args.workers} worker(s))",
        flush=True,
    )
    uvicorn.run(
        "boundsvc.api.asgi:create_app",
        factory=True,
        host=args.host,
        port=args.port,
        workers=args.workers,
        log_level=args.log_level,
        access_log=False,
    )
    return 0


def register(sub: Any) -> None:
    serve = sub.add_parser("serve", help="run the HTTP service")
    serve.add_argument("--host", default=os.environ.get("BOUNDSVC_HOST", "127.0.0.1"))
    serve.add_argument("--port", type=int, default=int(os.environ.get("BOUNDSVC_PORT", "8000")))
    serve.add_argument("--workers", type=int, default=1)
    serve.add_argument("--database-url", default=None)
    serve.add_argument("--log-level", default="warning")
    serve.set_defaults(func=_serve)
