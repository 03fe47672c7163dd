"""Certificate reports: an HTML page and the plot (PNG, SVG) of one certificate.

Also the small HTTP helpers the HTML routes share (studies, dashboard): the security headers
of a page and the visibility-checked loading of a certificate document.
"""

from __future__ import annotations

import functools
import json
from typing import Any

from fastapi import APIRouter, Depends
from starlette.responses import HTMLResponse, Response

from boundsvc import reports
from boundsvc.api.deps import Caller, get_caller, get_store
from boundsvc.errors import NotFound
from boundsvc.reports import MEDIA_TYPES, ImageFormat
from boundsvc.store import Store

router = APIRouter(prefix="/v1", tags=["reports"])

#: Pages load only their own CSS/JS and images; inline SVG formulas come as data: images.
CONTENT_SECURITY_POLICY = (
    "default-src 'none'; style-src 'self'; script-src 'self'; "
    "img-src 'self' data:; form-action 'self'; frame-ancestors 'none'; "
    "base-uri 'none'"
)
_PAGE_HEADERS = {
    "Content-Security-Policy": CONTENT_SECURITY_POLICY,
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "same-origin",  # no-referrer would make form posts send Origin: null
    "Cache-Control": "no-store",
}
#: Certificates are immutable: their plots can be cached (privately: visibility is per project).
_IMAGE_HEADERS = {"Cache-Control": "private, max-age=86400", "X-Content-Type-Options": "nosniff"}


def html_page(
    html: str, status_code: int = 200, headers: dict[str, str] | None = None
) -> HTMLResponse:
    """An HTML response with the pages' security headers."""
    return HTMLResponse(html, status_code=status_code, headers=_PAGE_HEADERS | (headers or {}))


def image(body: bytes, fmt: ImageFormat) -> Response:
    return Response(body, media_type=MEDIA_TYPES[fmt], headers=dict(_IMAGE_HEADERS))


def certificate_document(store: Store, caller: Caller, certificate_id: str) -> dict[str, Any]:
    """The certificate as a dict, if the caller's project sees it (404 otherwise)."""
    stored = store.get_certificate(certificate_id, caller.project)
    if stored is None:
        raise NotFound(
            "certificate_not_found", f"no certificate with id {certificate_id!r}", "certificate_id"
        )
    doc: dict[str, Any] = json.loads(stored.document)
    return doc


@functools.lru_cache(maxsize=128)
def _cached_plot(certificate_id: str, document: str, fmt: ImageFormat) -> bytes:
    # keyed by id and document: a certificate never changes, so neither does its plot
    return reports.certificate_plot(json.loads(document), fmt)


def certificate_image(
    store: Store, caller: Caller, certificate_id: str, fmt: ImageFormat
) -> Response:
    doc = certificate_document(store, caller, certificate_id)
    return image(_cached_plot(certificate_id, json.dumps(doc, sort_keys=True), fmt), fmt)


@router.get(
    "/certificates/{certificate_id}/report",
    response_class=HTMLResponse,
    responses={200: {"content": {"text/html": {}}, "description": "the report"}},
)
def certificate_report(
    certificate_id: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> HTMLResponse:
    """The report of a certificate: bound over time, terms, constants, rigor, provenance."""
    doc = certificate_document(store, caller, certificate_id)
    # relative URLs: the plot routes sit beside this one
    return html_page(
        reports.render_certificate_report(doc, plot_png="plot.png", plot_svg="plot.svg")
    )


@router.get(
    "/certificates/{certificate_id}/plot.png",
    responses={200: {"content": {"image/png": {}}, "description": "the plot"}},
)
def certificate_plot_png(
    certificate_id: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> Response:
    """The bound over time (log axis, vacuous region marked) and the term shares, as PNG."""
    return certificate_image(store, caller, certificate_id, "png")


@router.get(
    "/certificates/{certificate_id}/plot.svg",
    responses={200: {"content": {"image/svg+xml": {}}, "description": "the plot"}},
)
def certificate_plot_svg(
    certificate_id: str, store: Store = Depends(get_store), caller: Caller = Depends(get_caller)
) -> Response:
    """The same plot as SVG."""
    return certificate_image(store, caller, certificate_id, "svg")
