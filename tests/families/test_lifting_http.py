"""The boundary lifting over HTTP: problem -> plan with ``optional_components`` -> certificate.

Exact solution: the separable heat solution with inhomogeneous Dirichlet data (Fourier's
method, Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 4.1); the surrogate moves the
boundary values by ``eps phi``. The lifting is the standard lifting of Dirichlet data (Evans,
PDE, 2nd ed. 2010, sec. 5.5), see docs/theory/advection-diffusion.md, "Boundary lifting".
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import sympy as sp

from boundsvc.api import build_app
from boundsvc.settings import Settings
from boundsvc.store import open_store
from tests.families.manufactured import _fn, t, true_error, x
from tests.families.test_lifting import HEAT, PHI, U, _regularity, heat_operator
from tests.inprocess import InProcessClient

EPS = 1e-4


@pytest.fixture
def client(tmp_path: Path) -> Iterator[InProcessClient]:
    store = open_store(f"sqlite:///{tmp_path}/lifting.sqlite3")
    app = build_app(Settings(database_url="unused", host="127.0.0.1"), store)
    c = InProcessClient(app)
    yield c
    c.close()
    store.dispose()


def _residuals(plan: dict[str, Any], um: sp.Expr, g: sp.Expr) -> dict[str, list[float]]:
    comps = {c["name"]: np.asarray(c["points"]) for c in plan["components"]}
    p = comps["interior"]
    out = {"interior": _fn(heat_operator(um))(p[:, 0], p[:, 1]).tolist()}
    xs = comps["initial"][:, 0]
    out["initial"] = _fn(um - U.subs(t, 0))(np.zeros_like(xs), xs).tolist()
    pb = comps["boundary"]
    out["boundary"] = _fn(um - g)(pb[:, 0], pb[:, 1]).tolist()
    if "boundary_t" in comps:
        pt = comps["boundary_t"]
        assert np.array_equal(pt, pb)  # the same points, in the same order
        out["boundary_t"] = _fn(sp.diff(um - g, t))(pt[:, 0], pt[:, 1]).tolist()
    return out


def test_lifting_end_to_end(client: InProcessClient) -> None:
    """The problem lists boundary_t as optional; a plan that asks for it carries its points;
    sending it gives a valid certificate with the lifting, chosen over the flux estimate."""
    r = client.post("/v1/problems", json={"problem": HEAT})
    assert r.status_code == 200, r.text
    info = r.json()
    assert info["optional_components"] == ["boundary_t"]
    assert "boundary_t" not in info["components"]
    plain = client.post(
        "/v1/plans", json={"problem_id": info["problem_id"], "points": {"t": 16, "x": 16}}
    ).json()
    assert [c["name"] for c in plain["components"]] == ["interior", "initial", "boundary"]
    r = client.post(
        "/v1/plans",
        json={
            "problem_id": info["problem_id"],
            "points": {"t": 16, "x": 16},
            "optional_components": ["boundary_t"],
        },
    )
    assert r.status_code == 201, r.text
    plan = r.json()
    assert plan["plan_id"] != plain["plan_id"]
    assert "boundary_t" in [c["name"] for c in plan["components"]]
    um = U + EPS * PHI
    g = 1 - sp.Rational(4, 5) * x
    err = true_error(um - U, (0.0, 0.5), (0.0, 1.0))
    r = client.post(
        "/v1/certificates",
        json={
            "problem_id": info["problem_id"],
            "plan_id": plan["plan_id"],
            "regularity": _regularity(EPS),
            "residuals": _residuals(plan, um, g),
        },
    )
    assert r.status_code == 201, r.text
    lifted = r.json()
    assert lifted["status"] == "valid"
    assert lifted["bound"]["l2_space_time"] >= err.space_time
    assert lifted["bound"]["l2_final_time"] >= err.final_time
    profile = lifted["time_profile"]
    for tk, bk in zip(profile["t"], profile["l2_error_bound"], strict=True):
        assert bk >= err.at(tk)
    assert "boundary lifting" in [term["name"] for term in lifted["terms"]]
    # the flux estimate was assembled too and is named with its (larger) value
    assert any("reported (boundary lifting" in w for w in lifted["warnings"])
    assert "boundary_t" in lifted["provenance"]["arrays_sha256"]


def test_unknown_optional_component_is_a_422(client: InProcessClient) -> None:
    """Asking for an optional component the theorem does not offer names the field."""
    pid = client.post("/v1/problems", json={"problem": HEAT}).json()["problem_id"]
    r = client.post(
        "/v1/plans",
        json={"problem_id": pid, "points": {"t": 8, "x": 8}, "optional_components": ["periodic_x"]},
    )
    assert r.status_code == 422
    body = r.json()
    assert body["code"] == "plan_invalid"
    assert "optional_components" in str(body.get("errors") or body)
