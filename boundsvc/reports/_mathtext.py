"""LaTeX of the constants rendered offline, with matplotlib's mathtext, to small SVGs.

Mathtext implements a subset of TeX (no environments, no ``\\text``); a formula it cannot
parse is shown as plain text instead (:func:`latex_svg` returns None).
"""

from __future__ import annotations

import base64
import functools
import io

from matplotlib import mathtext

from boundsvc.reports._figures import RENDER_LOCK, styled

MAX_LATEX_CHARS = 2000


@functools.lru_cache(maxsize=512)
def latex_svg(latex: str) -> str | None:
    """The SVG document of ``$latex$``, or None when mathtext cannot parse it."""
    text = latex.strip()
    if not text or len(text) > MAX_LATEX_CHARS or "$" in text:
        return None
    buf = io.BytesIO()
    with RENDER_LOCK, styled():
        try:
            mathtext.math_to_image(f"${text}$", buf, dpi=110, format="svg", color="#1f2933")
        except (ValueError, RuntimeError):  # a parse error is a ValueError
            return None
    return buf.getvalue().decode("utf-8")


def latex_data_uri(latex: str | None) -> str | None:
    """A ``data:image/svg+xml`` URI for an ``<img>`` (ids of inline SVGs would collide)."""
    if not latex:
        return None
    svg = latex_svg(latex)
    if svg is None:
        return None
    return "data:image/svg+xml;base64," + base64.b64encode(svg.encode("utf-8")).decode("ascii")
