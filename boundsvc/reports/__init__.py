"""Reports of certificates and studies: plots (matplotlib, Agg), HTML (jinja2), statistics.

No external assets: the CSS and JS ship in ``static/``, formulas are rendered to SVG by
matplotlib's mathtext on the server.

The heavy modules (matplotlib, scipy.stats) are imported on first use of a name that needs
them (PEP 562 ``__getattr__``), so importing the service does not pay for them.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from boundsvc.reports._formats import MEDIA_TYPES, STATIC_FILES, ImageFormat

if TYPE_CHECKING:
    from boundsvc.reports._mathtext import latex_data_uri, latex_svg
    from boundsvc.reports._plots import (
        certificate_plot,
        model_history,
        study_scatter,
        study_sweep,
    )
    from boundsvc.reports._render import (
        render_certificate_report,
        render_dashboard_page,
        render_study_page,
        static_text,
    )
    from boundsvc.reports._study import (
        BOUND_QUANTITIES,
        StudyRow,
        assemble_study,
        pearson_log,
        spearman,
        spearman_fisher_ci,
        study_statistics,
    )
    from boundsvc.reports._view import fmt_number, model_label

_LAZY: dict[str, str] = {
    "latex_data_uri": "_mathtext",
    "latex_svg": "_mathtext",
    "certificate_plot": "_plots",
    "model_history": "_plots",
    "study_scatter": "_plots",
    "study_sweep": "_plots",
    "render_certificate_report": "_render",
    "render_dashboard_page": "_render",
    "render_study_page": "_render",
    "static_text": "_render",
    "BOUND_QUANTITIES": "_study",
    "StudyRow": "_study",
    "assemble_study": "_study",
    "pearson_log": "_study",
    "spearman": "_study",
    "spearman_fisher_ci": "_study",
    "study_statistics": "_study",
    "fmt_number": "_view",
    "model_label": "_view",
}


def __getattr__(name: str) -> Any:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'boundsvc.reports' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"boundsvc.reports.{module}"), name)
    globals()[name] = value
    return value


__all__ = [
    "BOUND_QUANTITIES",
    "MEDIA_TYPES",
    "STATIC_FILES",
    "ImageFormat",
    "StudyRow",
    "assemble_study",
    "certificate_plot",
    "fmt_number",
    "latex_data_uri",
    "latex_svg",
    "model_history",
    "model_label",
    "pearson_log",
    "render_certificate_report",
    "render_dashboard_page",
    "render_study_page",
    "spearman",
    "spearman_fisher_ci",
    "static_text",
    "study_scatter",
    "study_statistics",
    "study_sweep",
]
