"""The lab dashboard: server-rendered pages over the certificates and studies the caller sees.

Sign-in: the login form takes an API key and keeps it in an HttpOnly, SameSite=Strict cookie
(:data:`boundsvc.api.auth.SESSION_COOKIE`) which the authentication middleware honours on read
requests only; in open mode (loopback, no keys) no sign-in is needed.
"""

from __future__ import annotations

import json
from typing import Any
from urllib.parse import urlencode, urlsplit

from fastapi import APIRouter, Depends, Form, Query, Request
from starlette.responses import HTMLResponse, RedirectResponse, Response

from boundsvc import reports
from boundsvc.api import auth
from boundsvc.api.deps import Caller, get_caller, get_store
from boundsvc.api.routes.reports import certificate_document, html_page, image
from boundsvc.api.routes.studies import load_study, study_plots, study_summary
from boundsvc.errors import NotFound
from boundsvc.families import CATALOGUE
from boundsvc.reports import STATIC_FILES as _STATIC
from boundsvc.reports import ImageFormat
from boundsvc.store import CertificateSummary, InvalidCursor, Store

router = APIRouter(prefix="/dashboard", tags=["dashboard"], include_in_schema=False)

STATUSES = ("valid", "vacuous", "invalid-hypotheses")
SESSION_HOURS = 8
MODEL_HISTORY_LIMIT = 1000


def _chrome(request: Request, caller: Caller, section: str) -> dict[str, Any]:
    """What every page's header shows: the signed-in project, or open mode."""
    session = caller.project if caller.key_id is not None else None
    return {
        "section": section,
        "session": session,
        "open_mode": caller.key_id is None and caller.project is None,
    }


def _blank(value: str | None) -> str | None:
    return value.strip() or None if value is not None else None


def _row(summary: CertificateSummary, doc: dict[str, Any]) -> dict[str, Any]:
    bound = doc.get("bound") or {}
    return {
        "id": summary.id,
        "created": summary.created_at.strftime("%Y-%m-%d %H:%M"),
        "model_name": summary.model_name or None,
        "model_version": summary.model_version,
        "epoch": (doc.get("model") or {}).get("epoch"),
        "family": summary.family,
        "status": summary.status,
        "l2_space_time": reports.fmt_number(bound.get("l2_space_time")),
        "l2_final_time": reports.fmt_number(bound.get("l2_final_time")),
        "raw_space_time": bound.get("l2_space_time"),
        "raw_final_time": bound.get("l2_final_time"),
    }


def _documents(
    store: Store, caller: Caller, items: list[CertificateSummary]
) -> list[tuple[CertificateSummary, dict[str, Any]]]:
    out = []
    for summary in items:
        stored = store.get_certificate(summary.id, caller.project)
        if stored is not None:
            out.append((summary, json.loads(stored.document)))
    return out


@router.get("", response_class=HTMLResponse)
def certificates_page(
    request: Request,
    model: str | None = Query(default=None),
    version: str | None = Query(default=None),
    family: str | None = Query(default=None),
    status: str | None = Query(default=None),
    cursor: str | None = Query(default=None),
    limit: int = Query(default=50, ge=1, le=200),
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> Response:
    """The certificates the caller sees, newest first, filtered by model/version/family/status."""
    filters = {
        "model": _blank(model),
        "version": _blank(version),
        "family": _blank(family),
        "status": _blank(status),
    }
    try:
        page = store.list_certificates(
            caller.project,
            model_name=filters["model"],
            model_version=filters["version"],
            family=filters["family"],
            status=filters["status"],
            limit=limit,
            cursor=_blank(cursor),
        )
    except InvalidCursor:
        return RedirectResponse("/dashboard", status_code=303)
    rows = [_row(s, d) for s, d in _documents(store, caller, page.items)]
    counts: dict[str, int] = {}
    for c in store.count_certificates_by(caller.project):
        counts[c.status] = counts.get(c.status, 0) + c.count
    next_url = None
    if page.next_cursor:
        query = {k: v for k, v in filters.items() if v} | {"cursor": page.next_cursor}
        next_url = "/dashboard?" + urlencode(query)
    return html_page(
        reports.render_dashboard_page(
            "dashboard.html",
            rows=rows,
            filters=filters | {"any": any(filters.values())},
            families=[f.id for f in CATALOGUE],
            statuses=STATUSES,
            next_url=next_url,
            models=sorted({r["model_name"] for r in rows if r["model_name"]}),
            total_counts=[{"status": k, "count": v} for k, v in sorted(counts.items())],
            **_chrome(request, caller, "certificates"),
        )
    )


def _model_rows(store: Store, caller: Caller, name: str) -> list[dict[str, Any]]:
    """Every certificate of the model, oldest first (by epoch when all have one)."""
    items: list[CertificateSummary] = []
    cursor = None
    while len(items) < MODEL_HISTORY_LIMIT:
        page = store.list_certificates(caller.project, model_name=name, limit=500, cursor=cursor)
        items.extend(page.items)
        cursor = page.next_cursor
        if cursor is None:
            break
    rows = [_row(s, d) for s, d in _documents(store, caller, items[:MODEL_HISTORY_LIMIT])]
    rows.reverse()
    if rows and all(r["epoch"] is not None for r in rows):
        rows.sort(key=lambda r: r["epoch"])
    return rows


@router.get("/models/{name}", response_class=HTMLResponse)
def model_page(
    request: Request,
    name: str,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> HTMLResponse:
    """One model: its bound history over versions or training epochs."""
    rows = _model_rows(store, caller, name)
    if not rows:
        raise NotFound("not_found", f"no certificates of model {name!r}", "name")
    return html_page(
        reports.render_dashboard_page(
            "model.html",
            name=name,
            rows=list(reversed(rows)),
            by_epoch=all(r["epoch"] is not None for r in rows),
            latest=rows[-1]["l2_space_time"] if rows else None,
            plot_png=f"/dashboard/models/{name}/history.png",
            plot_svg=f"/dashboard/models/{name}/history.svg",
            **_chrome(request, caller, "certificates"),
        )
    )


def _history(store: Store, caller: Caller, name: str, fmt: ImageFormat) -> Response:
    rows = _model_rows(store, caller, name)
    points = [
        {
            "epoch": r["epoch"],
            "version": r["model_version"],
            "status": r["status"],
            "l2_space_time": r["raw_space_time"],
            "l2_final_time": r["raw_final_time"],
        }
        for r in rows
    ]
    return image(reports.model_history(points, fmt), fmt)


@router.get("/models/{name}/history.png")
def model_history_png(
    name: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> Response:
    return _history(store, caller, name, "png")


@router.get("/models/{name}/history.svg")
def model_history_svg(
    name: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> Response:
    return _history(store, caller, name, "svg")


@router.get("/certificates/{certificate_id}", response_class=HTMLResponse)
def certificate_page(
    request: Request,
    certificate_id: str,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> HTMLResponse:
    """The report of one certificate inside the dashboard."""
    doc = certificate_document(store, caller, certificate_id)
    base = f"/v1/certificates/{certificate_id}"
    return html_page(
        reports.render_certificate_report(
            doc,
            plot_png=f"{base}/plot.png",
            plot_svg=f"{base}/plot.svg",
            nav=True,
            **_chrome(request, caller, "certificates"),
        )
    )


@router.get("/studies", response_class=HTMLResponse)
def studies_page(
    request: Request, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> HTMLResponse:
    rows = []
    for stored in store.list_studies(caller.project, limit=200):
        summary = study_summary(stored)
        spearman = (stored.document.get("correlation") or {}).get("spearman") or {}
        rows.append(
            {
                "id": stored.id,
                "title": summary["title"] or "untitled study",
                "created": stored.created_at.strftime("%Y-%m-%d %H:%M"),
                "n": summary["certificates"],
                "median": reports.fmt_number(summary["median_effectivity"], 3),
                "rho": reports.fmt_number(spearman.get("rho"), 3),
            }
        )
    return html_page(
        reports.render_dashboard_page(
            "studies.html", rows=rows, **_chrome(request, caller, "studies")
        )
    )


@router.get("/studies/{study_id}", response_class=HTMLResponse)
def study_page(
    request: Request,
    study_id: str,
    store: Store = Depends(get_store),
    caller: Caller = Depends(get_caller),
) -> HTMLResponse:
    doc = load_study(store, caller, study_id).document
    plots = study_plots(f"/v1/studies/{study_id}", doc)
    return html_page(
        reports.render_study_page(doc, plots=plots, nav=True, **_chrome(request, caller, "studies"))
    )


@router.get("/static/{name}")
def static_file(name: str) -> Response:
    """The dashboard's own CSS and JS (no external assets)."""
    if name not in _STATIC:
        raise NotFound("not_found", f"no static file {name!r}", "name")
    return Response(
        reports.static_text(name),
        media_type=_STATIC[name],
        headers={"Cache-Control": "public, max-age=3600", "X-Content-Type-Options": "nosniff"},
    )


# ------------------------------------------------------------------------------ sign-in


def _login_form(error: str | None = None, status_code: int = 200) -> HTMLResponse:
    # no script on this page: it is served before sign-in, the script only after
    return html_page(
        reports.render_dashboard_page(
            "login.html", error=error, hours=SESSION_HOURS, nav=True, section="login", js_url=None
        ),
        status_code=status_code,
    )


def _same_origin(request: Request) -> bool:
    """A login form posted from another site is refused (login CSRF)."""
    origin = request.headers.get("origin") or request.headers.get("referer")
    if origin is None:
        return True  # not a browser, or one that sends neither header
    return origin != "null" and urlsplit(origin).netloc == request.headers.get("host", "")


@router.get("/login", response_class=HTMLResponse)
def login_page() -> HTMLResponse:
    return _login_form()


@router.post("/login", response_class=HTMLResponse)
def login(
    request: Request,
    api_key: str = Form(default="", max_length=512),
    store: Store = Depends(get_store),
) -> Response:
    """Check the key; on success keep it in the session cookie and go to the dashboard."""
    if not _same_origin(request):
        return _login_form("this form must be posted from the dashboard itself", 403)
    record = store.verify_api_key(api_key.strip())
    if record is None or "read" not in record.scopes:
        return _login_form("unknown, revoked or read-less API key", 401)
    response = RedirectResponse("/dashboard", status_code=303)
    response.set_cookie(
        auth.SESSION_COOKIE,
        api_key.strip(),
        max_age=SESSION_HOURS * 3600,
        path="/",
        httponly=True,
        samesite="strict",
        secure=request.url.scheme == "https",
    )
    response.headers["Cache-Control"] = "no-store"
    return response


@router.post("/logout")
def logout() -> Response:
    response = RedirectResponse("/dashboard/login", status_code=303)
    response.delete_cookie(auth.SESSION_COOKIE, path="/", httponly=True, samesite="strict")
    return response
