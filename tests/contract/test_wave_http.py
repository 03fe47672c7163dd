"""The wave family over HTTP: classification, the residual layout, refusals, one certificate.

Exact solution: the standing wave of the fixed string, u = sin(pi x) cos(2 pi t) for
u_tt = 4 u_xx on [0, 1] (separation of variables; Strauss, PDE: An Introduction, 2nd ed. 2008,
sec. 4.1 -- from memory).
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import sympy as sp

from boundsvc.api import build_app
from boundsvc.settings import Settings
from boundsvc.store import open_store
from tests.families.manufactured import t, true_error, x
from tests.inprocess import InProcessClient as TestClient

U = sp.sin(sp.pi * x) * sp.cos(2 * sp.pi * t)
PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)
PROBLEM = {
    "equation": "u_tt = 4*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 1.0],
    "boundary": "dirichlet",
    "initial_value": "sin(pi*x)",
    "initial_velocity": "0",
    "boundary_value": "0",
}


@pytest.fixture
def client(tmp_path: Path) -> Iterator[TestClient]:
    store = open_store(f"sqlite:///{tmp_path}/wave.sqlite3")
    app = build_app(Settings(database_url="unused", host="127.0.0.1"), store)
    c = TestClient(app)
    yield c
    c.close()
    store.dispose()


def _fn(expr: sp.Expr):  # type: ignore[no-untyped-def]
    f = sp.lambdify((t, x), expr, modules="numpy")
    return lambda tt, xx: np.broadcast_to(np.asarray(f(tt, xx), dtype=float), np.shape(tt))


def _residuals(plan: dict[str, Any], um: sp.Expr) -> dict[str, list[float]]:
    comps = {c["name"]: np.asarray(c["points"]) for c in plan["components"]}
    err = um - U
    p = comps["interior"]
    out = {"interior": _fn(sp.diff(um, t, 2) - 4 * sp.diff(um, x, 2))(p[:, 0], p[:, 1]).tolist()}
    xs = comps["initial"][:, 0]
    zero = np.zeros_like(xs)
    out["initial"] = _fn(err)(zero, xs).tolist()
    out["initial_t"] = _fn(sp.diff(err, t))(zero, xs).tolist()
    out["initial_x"] = _fn(sp.diff(err, x))(zero, xs).tolist()
    pb = comps["boundary"]
    out["boundary"] = _fn(err)(pb[:, 0], pb[:, 1]).tolist()
    out["boundary_t"] = _fn(sp.diff(err, t))(pb[:, 0], pb[:, 1]).tolist()
    return out


def test_problem_lists_the_wave_layout(client: TestClient) -> None:
    r = client.post("/v1/problems", json={"problem": PROBLEM})
    assert r.status_code == 200, r.text
    info = r.json()
    assert info["family"] == "wave"
    assert info["components"] == [
        "interior",
        "initial",
        "initial_t",
        "initial_x",
        "boundary",
        "boundary_t",
    ]
    assert info["required_regularity"] == ["sup_abs_u_x", "sup_abs_model_u_x"]
    assert "sup_abs_u_t" in info["optional_regularity"]  # initial_velocity given: data check
    assert {c["symbol"] for c in info["constants"]} >= {"E(t)", "r", "E(t0)", "B_x(t)"}
    families = client.get("/v1/families").json()
    listed = families["families"] if isinstance(families, dict) else families
    assert "wave" in {f["id"] for f in listed}


@pytest.mark.parametrize(
    ("equation", "reason"),
    [("u_tt = -u_xx", "wrong sign"), ("u_tt = u*u_xx", "not linear")],
)
def test_refusal_is_a_422_that_says_why(client: TestClient, equation: str, reason: str) -> None:
    r = client.post("/v1/problems", json={"problem": {**PROBLEM, "equation": equation}})
    assert r.status_code == 422
    assert r.headers["content-type"].startswith("application/problem+json")
    body = r.json()
    assert body["code"] == "problem_not_covered"
    assert "wave: " in body["detail"] and reason in body["detail"]


def test_certificate_over_http_holds_and_checks_lengths(client: TestClient) -> None:
    r = client.post(
        "/v1/plans",
        json={"problem": PROBLEM, "rule": "gauss-legendre", "points": {"t": 16, "x": 16}},
    )
    assert r.status_code == 201, r.text
    plan = r.json()
    names = [c["name"] for c in plan["components"]]
    assert names == ["interior", "initial", "initial_t", "initial_x", "boundary", "boundary_t"]
    um = U + 0.05 * PHI
    res = _residuals(plan, um)
    body = {
        "problem": PROBLEM,
        "plan_id": plan["plan_id"],
        "regularity": {"sup_abs_u_x": math.pi, "sup_abs_model_u_x": math.pi + 0.05 * 4.0},
        "residuals": res,
    }
    short = {**res, "boundary_t": res["boundary_t"][:-3]}
    bad = client.post("/v1/certificates", json={**body, "residuals": short})
    assert bad.status_code == 422
    err = bad.json()
    assert err["code"] == "residual_length"
    assert err["errors"][0]["field"] == "residuals.boundary_t"
    assert err["errors"][0]["index"] == len(res["boundary_t"]) - 3
    r = client.post("/v1/certificates", json=body)
    assert r.status_code == 201, r.text
    cert = r.json()
    assert cert["family"] == "wave" and cert["status"] == "valid", cert["warnings"]
    truth = true_error(um - U, (0.0, 1.0), (0.0, 1.0))
    assert cert["bound"]["l2_space_time"] >= truth.space_time
    assert cert["bound"]["l2_final_time"] >= truth.final_time
    for tk, bk in zip(
        cert["time_profile"]["t"], cert["time_profile"]["l2_error_bound"], strict=True
    ):
        assert bk >= truth.at(tk)
    assert cert["provenance"]["theory_document"] == "docs/theory/wave.md"
