"""Matplotlib (Agg backend, object API, no pyplot) figures as PNG or SVG bytes.

Matplotlib's global state (font caches, rcParams) is not thread-safe and FastAPI runs sync
routes in a thread pool, so every rendering holds :data:`RENDER_LOCK`.
"""

from __future__ import annotations

import io
import math
import threading
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import Any, cast

import matplotlib

matplotlib.use("Agg")  # before any other matplotlib import: no display, no GUI toolkit

from matplotlib import rc_context
from matplotlib.figure import Figure

from boundsvc.reports._formats import ImageFormat

RENDER_LOCK = threading.RLock()

INK = "#1f2933"
MUTED = "#6b7785"
GRID = "#e4e7eb"
BOUND = "#2563eb"
MEASURED = "#d97706"
DANGER = "#c0392b"
RIGOR_COLOURS: dict[str, str] = {
    "proven": "#2f855a",
    "assumed": "#b7791f",
    "statistical": "#6b46c1",
    "heuristic": "#c05621",
}

_STYLE: dict[str, Any] = {
    "font.family": "DejaVu Sans",
    "font.size": 9.5,
    "axes.edgecolor": MUTED,
    "axes.labelcolor": INK,
    "axes.titlesize": 10.5,
    "axes.titleweight": "bold",
    "axes.titlecolor": INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": GRID,
    "grid.linewidth": 0.8,
    "xtick.color": MUTED,
    "ytick.color": MUTED,
    "legend.frameon": False,
    "svg.hashsalt": "boundsvc",  # deterministic element ids: the same input, the same SVG
    "svg.fonttype": "path",  # text as paths: no font needed where the SVG is viewed
}


@contextmanager
def styled() -> Iterator[None]:
    """Hold the render lock with boundsvc's plot style."""
    with RENDER_LOCK, rc_context(cast(Any, _STYLE)):  # rcParams keys are typed as Literals
        yield


def new_figure(width: float, height: float) -> Figure:
    return Figure(figsize=(width, height), layout="constrained")


def figure_bytes(fig: Figure, fmt: ImageFormat) -> bytes:
    """Encode a figure; metadata without dates so the output is reproducible."""
    buf = io.BytesIO()
    metadata: dict[str, Any] = {"Date": None} if fmt == "svg" else {"Software": None}
    fig.savefig(buf, format=fmt, dpi=110, metadata=metadata, facecolor="white")
    return buf.getvalue()


def positive(values: Sequence[float | None]) -> list[float]:
    return [v for v in values if v is not None and math.isfinite(v) and v > 0]


def placeholder(fig: Figure, message: str) -> None:
    ax = fig.add_subplot()
    ax.set_axis_off()
    ax.text(
        0.5, 0.5, message, ha="center", va="center", color=MUTED, wrap=True, transform=ax.transAxes
    )
