"""Certify a perturbed closed-form solution through the HTTP contract and measure the truth.

The flow is the one a client follows: ``POST /v1/problems``, a Gauss-Legendre ``POST /v1/plans``,
residuals evaluated at the plan's points from the perturbed closed form, ``POST /v1/certificates``
(base64 residuals, through :class:`validation.service.RawApi`). The app is built in-process
(:func:`in_process_service`, an ASGI transport, a temporary SQLite store), so every case exercises
the real routers, validation, store and serialisation without a network.
"""

from __future__ import annotations

import contextlib
import math
import tempfile
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import sympy as sp

from validation.closed_form._case import ClosedFormCase, VectorFn
from validation.closed_form._truth import TrueError, true_error
from validation.service import RawApi

#: Relative rounding slack of the comparison bound >= truth. At t0 the bound is the plan's
#: quadrature of the initial residual squared and the truth a fine quadrature of the same
#: function: for smooth data both are exact to the last bits and may differ by an ulp either
#: way. 1e-12 relative is far below any modelling term; it covers that rounding only.
ROUNDING = 1e-12


@contextlib.contextmanager
def in_process_service() -> Iterator[RawApi]:
    """The service's app over a temporary SQLite store, behind an in-process HTTP client."""
    from boundsvc.api import build_app
    from boundsvc.settings import Settings
    from boundsvc.store import open_store
    from tests.inprocess import InProcessClient  # the project's one in-process client

    with tempfile.TemporaryDirectory(prefix="boundsvc-closed-form-") as tmp:
        store = open_store(f"sqlite:///{Path(tmp) / 'closed_form.sqlite3'}")
        settings = Settings(
            database_url="unused",
            host="127.0.0.1",
            rate_limit_per_minute=100_000,
            log_level="warning",
        )
        client = InProcessClient(build_app(settings, store))
        try:
            yield RawApi(client)
        finally:
            client.close()
            store.dispose()


@dataclass
class CaseResult:
    """One certificate of one case at one perturbation size, against the true error."""

    case: ClosedFormCase
    eps: float
    certificate: dict[str, Any]
    truth: TrueError
    profile: list[tuple[float, float | None, float]] = field(default_factory=list)

    @property
    def status(self) -> str:
        return str(self.certificate["status"])

    def bound(self, name: str) -> float | None:
        value = self.certificate["bound"].get(name)
        return None if value is None else float(value)

    def pairs(self) -> list[tuple[str, float | None, float]]:
        """(where, bound, true error) for every reported quantity."""
        if self.case.steady:
            return [("l2_space", self.bound("l2_space"), self.truth.l2_space)]
        out: list[tuple[str, float | None, float]] = [
            ("l2_space_time", self.bound("l2_space_time"), self.truth.space_time),
            ("l2_final_time", self.bound("l2_final_time"), self.truth.final_time),
        ]
        out += [(f"profile t={tk:.6g}", bk, ek) for tk, bk, ek in self.profile]
        return out

    def violations(self) -> list[str]:
        """Every place where a reported finite bound is below the true error (the worst bug)."""
        return [
            f"{where}: bound {b!r} < true error {e!r}"
            for where, b, e in self.pairs()
            if b is not None and b < e * (1 - ROUNDING)
        ]

    def effectivity(self, name: str) -> float:
        """bound / true error (nan when the bound is vacuous)."""
        truth = {
            "l2_space_time": self.truth.space_time,
            "l2_final_time": self.truth.final_time,
            "l2_space": self.truth.l2_space,
        }[name]
        b = self.bound(name)
        return math.nan if b is None or truth == 0 else b / truth

    def min_profile_ratio(self) -> float:
        ratios = [bk / ek for _, bk, ek in self.profile if bk is not None and ek > 0]
        return min(ratios) if ratios else math.nan


def _columns(
    case: ClosedFormCase, axes: Sequence[str], points: np.ndarray, t0: float | None
) -> list[np.ndarray]:
    """Point columns in the order of ``case.variables`` (``t = t0`` where a set has no t)."""
    by_axis = {a: points[:, i] for i, a in enumerate(axes)}
    names = [str(v) for v in case.variables]
    n = points.shape[0]
    return [by_axis[a] if a in by_axis else np.full(n, t0) for a in names]


def _flat(values: np.ndarray) -> np.ndarray:
    return values[:, 0] if values.shape[1] == 1 else values


def form_residuals(
    case: ClosedFormCase, eps: float, plan: Mapping[str, Any]
) -> dict[str, np.ndarray]:
    """The surrogate's residuals at the plan's points (definitions of docs/api.md).

    ``interior`` is ``lhs - rhs`` of the model; ``initial`` and ``boundary`` are
    ``u_model - u0`` and ``u_model - g`` with the exact solution's data, i.e. ``eps * phi``, and
    ``initial_<v>`` / ``boundary_<v>`` their derivatives in ``v``; ``periodic`` and
    ``periodic_<v>`` are the face mismatches of the model (or of its ``v``-derivative).
    Optional components a plan lists are answered the same way.
    """
    time = case.time
    t0 = None if time is None else time[0]
    out: dict[str, np.ndarray] = {}
    for comp in plan["components"]:
        name, axes = comp["name"], comp["axes"]
        pts = np.asarray(comp["points"], dtype=float).reshape(len(comp["weights"]), -1)
        cols = _columns(case, axes, pts, t0)
        base, _, wrt = name.partition("_")
        if name == "interior":
            out[name] = _flat(case.residual_fn(eps)(*cols))
        elif base in ("initial", "boundary"):
            out[name] = _flat(_derivative(case, [eps * p for p in case.perturbation], wrt)(*cols))
        elif base == "periodic":
            out[name] = _periodic(case, _derivative(case, list(case.model(eps)), wrt), cols)
        else:
            raise NotImplementedError(f"{case.key}: residual component {name!r}")
    return out


def _derivative(case: ClosedFormCase, exprs: list[sp.Expr], wrt: str) -> VectorFn:
    if wrt:
        var = next(v for v in case.variables if str(v) == wrt)
        exprs = [sp.diff(e, var) for e in exprs]
    return VectorFn(case.variables, exprs)


def _periodic(case: ClosedFormCase, fn: VectorFn, cols: list[np.ndarray]) -> np.ndarray:
    """``fn(hi face) - fn(lo face)`` at the low-face points; the plan lists the low faces of
    the periodic axes one after the other, in axis order, with equally many points each."""
    names = [str(v) for v in case.variables]
    periodic = [a for a in case.axes if _boundary(case, a) == "periodic"]
    n = cols[0].size
    chunk = n // len(periodic)
    out = np.empty((n, len(fn.exprs)))
    for i, axis in enumerate(periodic):
        k = names.index(axis)
        part = slice(i * chunk, (i + 1) * chunk)
        lo, hi = case.box[axis]
        if chunk * len(periodic) != n or not np.allclose(cols[k][part], lo):
            raise NotImplementedError(f"{case.key}: unexpected layout of the periodic faces")
        sub = [c[part] for c in cols]
        hi_cols = list(sub)
        hi_cols[k] = np.full_like(sub[k], hi)
        out[part] = fn(*hi_cols) - fn(*sub)
    return _flat(out)


def _boundary(case: ClosedFormCase, axis: str) -> str:
    kind = case.problem.get("boundary", "dirichlet")
    return str(kind.get(axis, "dirichlet") if isinstance(kind, Mapping) else kind)


def run_case(api: RawApi, case: ClosedFormCase, eps: float) -> CaseResult:
    """Certify ``u_exact + eps * phi`` through the HTTP API and compare with the truth."""
    info = api.problem(case.problem)
    if info["family"] != case.family:
        raise AssertionError(f"{case.key}: classified {info['family']}, expected {case.family}")
    plan = api.plan(info["problem_id"], case.plan_points())
    residuals = form_residuals(case, eps, plan)
    cert = api.certify(
        info["problem_id"],
        plan["plan_id"],
        case.regularity_for(eps),
        residuals,
        {"name": f"closed-form/{case.key}", "version": f"eps={eps:g}"},
    )
    truth = true_error(case.error_fn(eps), case.time, case.box)
    result = CaseResult(case, eps, cert, truth)
    tp = cert.get("time_profile")
    if tp:
        result.profile = [
            (float(tk), None if bk is None else float(bk), truth.at(float(tk)))
            for tk, bk in zip(tp["t"], tp["l2_error_bound"], strict=True)
        ]
    return result
