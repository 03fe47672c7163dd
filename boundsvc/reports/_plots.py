"""The plots of reports, studies and model pages (PNG or SVG bytes)."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from matplotlib.axes import Axes

from boundsvc.reports._figures import (
    BOUND,
    DANGER,
    INK,
    MEASURED,
    MUTED,
    RIGOR_COLOURS,
    figure_bytes,
    new_figure,
    placeholder,
    positive,
    styled,
)
from boundsvc.reports._formats import ImageFormat


def _short(text: str, limit: int = 28) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _time_profile(ax: Axes, doc: Mapping[str, Any]) -> None:
    profile = doc.get("time_profile") or {}
    ts = list(profile.get("t") or [])
    bs = list(profile.get("l2_error_bound") or [])
    ax.set_title("L2 error bound over time")
    ax.set_xlabel("t")
    ax.set_ylabel("bound on ||u_model(t) - u(t)||")
    finite = positive(bs)
    if not ts or not finite:
        ax.text(
            0.5,
            0.5,
            "no finite bound to plot",
            ha="center",
            va="center",
            color=MUTED,
            transform=ax.transAxes,
        )
        return
    y = np.array([b if b is not None and math.isfinite(b) and b > 0 else np.nan for b in bs])
    ax.plot(ts, y, color=BOUND, linewidth=2.0, label="bound at t")
    ax.set_yscale("log")
    last = max(i for i, b in enumerate(y) if not np.isnan(b))
    ax.plot([ts[last]], [y[last]], "o", color=BOUND, markersize=5)
    vacuous_from = doc.get("vacuous_from")
    t_end = ts[-1]
    problem = doc.get("problem") or {}
    if isinstance(problem.get("time"), list) and len(problem["time"]) == 2:
        t_end = max(t_end, float(problem["time"][1]))
    if vacuous_from is not None:
        ax.axvspan(float(vacuous_from), t_end, color=DANGER, alpha=0.08, linewidth=0)
        ax.axvline(
            float(vacuous_from),
            color=DANGER,
            linestyle="--",
            linewidth=1.4,
            label=f"vacuous from t = {float(vacuous_from):.4g}",
        )
        ax.set_xlim(ts[0], t_end)
    ax.legend(loc="best", fontsize=8.5)


def _term_shares(ax: Axes, doc: Mapping[str, Any]) -> None:
    terms = [t for t in doc.get("terms") or [] if t.get("share_final_time") is not None]
    ax.set_title("share of each term (final time)")
    if not terms:
        ax.set_axis_off()
        ax.text(
            0.5,
            0.5,
            "no term shares",
            ha="center",
            va="center",
            color=MUTED,
            transform=ax.transAxes,
        )
        return
    names = [_short(str(t.get("name", "?"))) for t in terms]
    shares = [100.0 * float(t["share_final_time"]) for t in terms]
    colours = [RIGOR_COLOURS.get(str(t.get("rigor")), MUTED) for t in terms]
    pos = np.arange(len(terms))[::-1]
    ax.barh(pos, shares, color=colours, height=0.6)
    ax.set_yticks(pos, names)
    ax.set_xlabel("% of the squared bound")
    ax.grid(axis="y", visible=False)
    right = max(100.0, max(shares) * 1.05)
    ax.set_xlim(min(0.0, min(shares) * 1.1), right * 1.18)
    for p, s in zip(pos, shares, strict=True):
        ax.text(max(s, 0.0) + right * 0.02, p, f"{s:.1f}%", va="center", color=INK, fontsize=8.5)
    seen = dict.fromkeys(str(t.get("rigor")) for t in terms)
    handles = [ax.bar(0, 0, color=RIGOR_COLOURS.get(r, MUTED), label=r) for r in seen]
    ax.legend(handles=handles, loc="lower right", fontsize=8, title="rigor", title_fontsize=8)


def certificate_plot(doc: Mapping[str, Any], fmt: ImageFormat) -> bytes:
    """The bound over time (log axis, vacuous region marked) beside the term shares."""
    with styled():
        fig = new_figure(9.0, 3.6)
        left, right = fig.subplots(1, 2, width_ratios=[1.45, 1.0])
        _time_profile(left, doc)
        _term_shares(right, doc)
        return figure_bytes(fig, fmt)


def study_scatter(points: Sequence[Mapping[str, Any]], fmt: ImageFormat) -> bytes:
    """Bound against measured error (log-log) with the diagonal bound = error."""
    rows = [p for p in points if len(positive([p.get("bound"), p.get("measured_error")])) == 2]
    with styled():
        fig = new_figure(5.2, 4.2)
        if not rows:
            placeholder(fig, "no certificate has both a finite bound and a measured error")
            return figure_bytes(fig, fmt)
        ax = fig.add_subplot()
        err = np.array([float(p["measured_error"]) for p in rows])
        bnd = np.array([float(p["bound"]) for p in rows])
        lo = 10 ** math.floor(math.log10(min(err.min(), bnd.min())))
        hi = 10 ** math.ceil(math.log10(max(err.max(), bnd.max())))
        ax.plot(
            [lo, hi], [lo, hi], color=MUTED, linestyle="--", linewidth=1.2, label="bound = error"
        )
        ok = bnd >= err
        ax.scatter(err[ok], bnd[ok], color=BOUND, s=36, zorder=3, label="certificate")
        if not ok.all():
            ax.scatter(
                err[~ok],
                bnd[~ok],
                color=DANGER,
                marker="x",
                s=50,
                zorder=3,
                label="bound below error",
            )
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlim(lo, hi)
        ax.set_ylim(lo, hi)
        ax.set_xlabel("measured error")
        ax.set_ylabel("certified bound")
        ax.set_title("bound vs measured error")
        ax.legend(loc="upper left", fontsize=8.5)
        return figure_bytes(fig, fmt)


def study_sweep(points: Sequence[Mapping[str, Any]], name: str, fmt: ImageFormat) -> bytes:
    """Bound and measured error against the swept parameter."""
    rows = sorted(
        (p for p in points if p.get("parameter") is not None), key=lambda p: float(p["parameter"])
    )
    with styled():
        fig = new_figure(5.2, 4.2)
        if not rows:
            placeholder(fig, "no certificate has a value of the swept parameter")
            return figure_bytes(fig, fmt)
        ax = fig.add_subplot()
        par = [float(p["parameter"]) for p in rows]

        def series(key: str) -> np.ndarray:
            return np.array([float(p[key]) if positive([p.get(key)]) else np.nan for p in rows])

        bnd, err = series("bound"), series("measured_error")
        ax.plot(par, bnd, "o-", color=BOUND, linewidth=1.8, label="certified bound")
        if not np.all(np.isnan(err)):
            ax.plot(par, err, "s--", color=MEASURED, linewidth=1.5, label="measured error")
        if all(v > 0 for v in par) and max(par) / min(par) >= 20:
            ax.set_xscale("log")
        if not np.all(np.isnan(bnd)) or not np.all(np.isnan(err)):
            ax.set_yscale("log")
        ax.set_xlabel(name)
        ax.set_ylabel("L2 error")
        ax.set_title(f"against {name}")
        ax.legend(loc="best", fontsize=8.5)
        return figure_bytes(fig, fmt)


def model_history(points: Sequence[Mapping[str, Any]], fmt: ImageFormat) -> bytes:
    """A model's bounds over training epochs (when every certificate has one) or versions.

    ``points`` are oldest first, each with ``epoch``, ``version``, ``l2_space_time``,
    ``l2_final_time`` and ``status``.
    """
    with styled():
        fig = new_figure(8.0, 3.4)
        if not points:
            placeholder(fig, "no certificates for this model")
            return figure_bytes(fig, fmt)
        ax = fig.add_subplot()
        by_epoch = all(p.get("epoch") is not None for p in points)
        xs = [float(p["epoch"]) for p in points] if by_epoch else list(range(len(points)))
        for key, colour, label in (
            ("l2_space_time", BOUND, "space-time bound"),
            ("l2_final_time", MEASURED, "final-time bound"),
        ):
            ys = [float(p[key]) if positive([p.get(key)]) else np.nan for p in points]
            ax.plot(xs, ys, "o-", color=colour, linewidth=1.6, markersize=4, label=label)
        finite = positive(
            [p.get("l2_space_time") for p in points] + [p.get("l2_final_time") for p in points]
        )
        if finite:
            ax.set_yscale("log")
            top = max(finite) * 2.0
            vac = [x for x, p in zip(xs, points, strict=True) if p.get("status") != "valid"]
            if vac:
                ax.scatter(
                    vac,
                    [top] * len(vac),
                    marker="v",
                    color=DANGER,
                    s=40,
                    zorder=3,
                    label="not valid (vacuous / invalid hypotheses)",
                )
        if by_epoch:
            ax.set_xlabel("training epoch")
        else:
            ax.set_xticks(
                xs,
                [_short(str(p.get("version") or "?"), 12) for p in points],
                rotation=30 if len(points) > 6 else 0,
            )
            ax.set_xlabel("model version (oldest first)")
        ax.set_ylabel("L2 error bound")
        ax.set_title("bound history")
        ax.legend(loc="best", fontsize=8.5)
        return figure_bytes(fig, fmt)
