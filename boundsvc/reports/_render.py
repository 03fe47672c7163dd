"""HTML of reports, studies and the dashboard: jinja2 templates, no external assets.

Pages served by the service link the package's own CSS/JS (``/dashboard/static/...``); a
standalone report (``boundsvc report --out DIR``) inlines them so the file opens anywhere.
"""

from __future__ import annotations

import functools
from collections.abc import Mapping
from importlib import resources
from typing import Any

import jinja2

from boundsvc.reports._formats import STATIC_FILES
from boundsvc.reports._view import certificate_view, fmt_number, fmt_percent, study_view

STATIC_PREFIX = "/dashboard/static/"


@functools.lru_cache(maxsize=1)
def environment() -> jinja2.Environment:
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("boundsvc.reports", "templates"),
        autoescape=jinja2.select_autoescape(default=True, default_for_string=True),
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters["num"] = fmt_number
    env.filters["percent"] = fmt_percent
    return env


@functools.lru_cache(maxsize=len(STATIC_FILES))
def static_text(name: str) -> str:
    """The text of a static file shipped with the package (KeyError if unknown)."""
    if name not in STATIC_FILES:
        raise KeyError(name)
    return resources.files("boundsvc.reports").joinpath("static", name).read_text("utf-8")


def _page(template: str, *, standalone: bool, context: Mapping[str, Any]) -> str:
    assets = (
        {"inline_css": static_text("boundsvc.css"), "css_url": None, "js_url": None}
        if standalone
        else {
            "inline_css": None,
            "css_url": STATIC_PREFIX + "boundsvc.css",
            "js_url": STATIC_PREFIX + "dashboard.js",
        }
    )
    base = {"nav": not standalone, "session": None, "open_mode": False, "section": None}
    return environment().get_template(template).render(**(base | assets | dict(context)))


def render_certificate_report(
    doc: Mapping[str, Any],
    *,
    plot_png: str,
    plot_svg: str,
    standalone: bool = False,
    **context: Any,
) -> str:
    """The report of one certificate; ``plot_*`` are the image URLs (or file names)."""
    return _page(
        "report.html",
        standalone=standalone,
        context={"c": certificate_view(doc), "plot_png": plot_png, "plot_svg": plot_svg, **context},
    )


def render_study_page(
    study: Mapping[str, Any], *, plots: Mapping[str, str], standalone: bool = False, **context: Any
) -> str:
    """The page of one study; ``plots`` maps ``scatter``/``sweep`` to image URLs."""
    return _page(
        "study.html",
        standalone=standalone,
        context={"s": study_view(study), "plots": dict(plots), **context},
    )


def render_dashboard_page(template: str, **context: Any) -> str:
    """A dashboard page (``dashboard.html``, ``model.html``, ``studies.html``, ``login.html``)."""
    return _page(template, standalone=False, context=context)
