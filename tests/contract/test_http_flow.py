"""The HTTP contract end to end (problem -> plan -> certificate) on the in-process app.

Exact solutions: the separable heat solution with inhomogeneous Dirichlet data (Fourier's method,
Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 4.1 and 5.6) and the viscous Burgers front
(Whitham, Linear and Nonlinear Waves, 1974, sec. 4.3); the compressive profile u = x/(t - 2)
of Burgers' equation (u_xx = 0, so it solves the viscous and inviscid equation alike).
"""

from __future__ import annotations

import base64
import math
from collections.abc import Iterator
from pathlib import Path
from typing import Any, ClassVar

import numpy as np
import pytest
import sympy as sp

from boundsvc.api import build_app
from boundsvc.settings import Settings
from boundsvc.store import open_store
from tests.families.manufactured import t, true_error, x
from tests.inprocess import InProcessClient as TestClient

PHI = sp.sin(3 * t + 1) * (x**2 + sp.Rational(1, 2)) * sp.cos(2 * x)


@pytest.fixture
def client(tmp_path: Path) -> Iterator[TestClient]:
    store = open_store(f"sqlite:///{tmp_path}/contract.sqlite3")
    app = build_app(Settings(database_url="unused", host="127.0.0.1"), store)
    c = TestClient(app)
    yield c
    c.close()
    store.dispose()


def _fn(expr: sp.Expr):  # type: ignore[no-untyped-def]
    f = sp.lambdify((t, x), expr, modules="numpy")
    return lambda tt, xx: np.broadcast_to(np.asarray(f(tt, xx), dtype=float), np.shape(tt))


def _residuals(
    plan: dict[str, Any], residual: sp.Expr, u0_err: sp.Expr, b_err: sp.Expr
) -> dict[str, list[float]]:
    comps = {c["name"]: c for c in plan["components"]}
    p = np.asarray(comps["interior"]["points"])
    out = {"interior": _fn(residual)(p[:, 0], p[:, 1]).tolist()}
    xs = np.asarray(comps["initial"]["points"])[:, 0]
    out["initial"] = _fn(u0_err)(np.zeros_like(xs), xs).tolist()
    pb = np.asarray(comps["boundary"]["points"])
    out["boundary"] = _fn(b_err)(pb[:, 0], pb[:, 1]).tolist()
    return out


def _flow(
    client: TestClient,
    problem: dict[str, Any],
    regularity: dict[str, Any],
    u: sp.Expr,
    um: sp.Expr,
    operator: Any,
    points: dict[str, int],
) -> dict[str, Any]:
    r = client.post("/v1/problems", json={"problem": problem})
    assert r.status_code == 200, r.text
    info = r.json()
    for key in info["required_regularity"]:
        assert any(
            k in regularity
            for k in next(q["any_of"] for q in info["regularity_requirements"] if q["key"] == key)
        )
    r = client.post(
        "/v1/plans", json={"problem": problem, "rule": "gauss-legendre", "points": points}
    )
    assert r.status_code == 201, r.text
    plan = r.json()
    assert plan["problem_id"] == info["problem_id"]
    res = _residuals(plan, operator(um), (um - u).subs(t, 0), um - u)
    r = client.post(
        "/v1/certificates",
        json={
            "problem": problem,
            "plan_id": plan["plan_id"],
            "regularity": regularity,
            "residuals": res,
            "model": {"name": "m", "version": "1"},
        },
    )
    assert r.status_code == 201, r.text
    cert = r.json()
    again = client.get(f"/v1/certificates/{cert['id']}")
    assert again.status_code == 200 and again.json() == cert
    return cert


def _assert_above(cert: dict[str, Any], err: Any) -> None:
    assert cert["status"] == "valid", cert["warnings"]
    assert cert["bound"]["l2_space_time"] >= err.space_time
    assert cert["bound"]["l2_final_time"] >= err.final_time
    for tk, bk in zip(
        cert["time_profile"]["t"], cert["time_profile"]["l2_error_bound"], strict=True
    ):
        assert bk >= err.at(tk)
    for field in (
        "id",
        "status",
        "family",
        "bound",
        "time_profile",
        "terms",
        "constants",
        "warnings",
        "provenance",
    ):
        assert field in cert
    for key in (
        "service_version",
        "libraries",
        "problem_sha256",
        "inputs_sha256",
        "plan_id",
        "theorem",
        "created_at",
    ):
        assert key in cert["provenance"]
    assert {term["rigor"] for term in cert["terms"]} <= {
        "proven",
        "assumed",
        "statistical",
        "heuristic",
    }


@pytest.mark.parametrize("eps", [1e-1, 1e-3])
def test_heat_inhomogeneous_dirichlet_over_http(client: TestClient, eps: float) -> None:
    k = 0.4
    u = (
        1
        - sp.Rational(4, 5) * x
        + sp.Rational(3, 5) * sp.exp(-k * sp.pi**2 * t) * sp.sin(sp.pi * x)
    )
    problem = {
        "equation": "u_t = k*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 0.5],
        "parameters": {"k": k},
        "boundary": "dirichlet",
        "initial_value": "1 - 0.8*x + 0.6*sin(pi*x)",
        "boundary_value": "1 - 0.8*x",
    }
    um = u + eps * PHI
    reg = {"sup_abs_u_x": "0.8 + 0.6*pi*exp(-k*pi^2*t)", "sup_abs_model_u_x": 3.0 + 5 * eps}
    cert = _flow(
        client,
        problem,
        reg,
        u,
        um,
        lambda v: sp.diff(v, t) - k * sp.diff(v, x, 2),
        {"t": 24, "x": 24},
    )
    _assert_above(cert, true_error(um - u, (0.0, 0.5), (0.0, 1.0)))
    assert cert["family"] == "linear-advection-diffusion-reaction"


@pytest.mark.parametrize("nu", [0.05, 0.0])
def test_burgers_viscous_and_inviscid_with_time_varying_regularity(
    client: TestClient, nu: float
) -> None:
    u = x / (t - 2)
    problem = {
        "equation": "u_t + u*u_x = nu*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.5],
        "parameters": {"nu": nu},
        "boundary": "dirichlet",
        "initial_value": "-x/2",
        "boundary_value": "x/(t - 2)",
    }
    eps = 1e-2
    um = u + eps * PHI
    reg: dict[str, Any] = {"sup_neg_u_x": "1/(2 - t)"}
    if nu > 0:
        reg |= {"sup_abs_u_x": "1/(2 - t)", "sup_abs_model_u_x": "1/(2 - t) + 0.05"}
    op = lambda v: sp.diff(v, t) + v * sp.diff(v, x) - nu * sp.diff(v, x, 2)  # noqa: E731
    cert = _flow(client, problem, reg, u, um, op, {"t": 24, "x": 24})
    _assert_above(cert, true_error(um - u, (0.0, 1.5), (0.0, 1.0)))
    assert cert["family"] == "scalar-conservation-law"


def test_base64_and_json_lists_give_the_same_certificate(client: TestClient) -> None:
    problem: ClassVar[dict[str, Any]] = {
        "equation": "u_t = u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
    }
    plan = client.post("/v1/plans", json={"problem": problem, "points": {"t": 8, "x": 8}}).json()
    rng = np.random.default_rng(3)
    res = {c["name"]: rng.normal(scale=1e-3, size=c["size"]) for c in plan["components"]}
    reg = {"sup_abs_u_x": 2.0, "sup_abs_model_u_x": 2.5}
    as_list = client.post(
        "/v1/certificates",
        json={
            "problem": problem,
            "plan_id": plan["plan_id"],
            "regularity": reg,
            "residuals": {k: v.tolist() for k, v in res.items()},
        },
    ).json()
    encoded = {
        k: {
            "dtype": "float64",
            "encoding": "base64",
            "data": base64.b64encode(v.astype("<f8").tobytes()).decode(),
        }
        for k, v in res.items()
    }
    as_b64 = client.post(
        "/v1/certificates",
        json={
            "problem": problem,
            "plan_id": plan["plan_id"],
            "regularity": reg,
            "residuals": encoded,
        },
    ).json()
    assert as_b64["bound"] == as_list["bound"]
    assert as_b64["id"] == as_list["id"]


def _problem_error(response: Any, status: int, code: str) -> dict[str, Any]:
    assert response.status_code == status, response.text
    assert response.headers["content-type"].startswith("application/problem+json")
    body = response.json()
    assert body["code"] == code, body
    for key in ("type", "title", "status", "detail"):
        assert key in body
    return body


@pytest.mark.parametrize(
    "equation",
    [
        "__import__('os').system('true')",
        "u_t = ().__class__",
        "lambda: 0",
        "u_t = 9^9^9^9",
        "u_t = " + "(" * 5000 + "u" + ")" * 5000,
        "u_t = exec('1')",
        "u_t = open('f')",
        "u_t = u_xx; import os",
        "u_t = u_xx\x00",
        "u_t = u_xx\u202e",
    ],
)
def test_hostile_equations_are_refused(client: TestClient, equation: str) -> None:
    problem = {"equation": equation, "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]}
    r = client.post("/v1/problems", json={"problem": problem})
    assert 400 <= r.status_code < 500
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.json()["errors"][0]["field"].startswith("problem")


def test_not_covered_says_why(client: TestClient) -> None:
    problem = {"equation": "u_t = u*u_xx", "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]}
    body = _problem_error(
        client.post("/v1/problems", json={"problem": problem}), 422, "problem_not_covered"
    )
    assert "u_xx" in body["detail"]


class TestCertificateValidation:
    problem: ClassVar[dict[str, Any]] = {
        "equation": "u_t = u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
    }

    def _setup(self, client: TestClient) -> tuple[dict[str, Any], dict[str, list[float]]]:
        plan = client.post(
            "/v1/plans", json={"problem": self.problem, "points": {"t": 6, "x": 6}}
        ).json()
        res = {c["name"]: [0.001] * c["size"] for c in plan["components"]}
        return plan, res

    def _post(
        self, client: TestClient, plan: dict[str, Any], res: Any, reg: dict[str, Any] | None = None
    ) -> Any:
        return client.post(
            "/v1/certificates",
            json={
                "problem": self.problem,
                "plan_id": plan["plan_id"],
                "regularity": reg
                if reg is not None
                else {"sup_abs_u_x": 1.0, "sup_abs_model_u_x": 1.0},
                "residuals": res,
            },
        )

    def test_missing_key_is_named(self, client: TestClient) -> None:
        plan, res = self._setup(client)
        body = _problem_error(
            self._post(client, plan, res, {"sup_abs_u_x": 1.0}), 422, "regularity_missing"
        )
        assert body["errors"][0]["field"] == "regularity.sup_abs_model_u_x"

    def test_unknown_key_is_refused(self, client: TestClient) -> None:
        plan, res = self._setup(client)
        reg = {"sup_abs_u_x": 1.0, "sup_abs_model_u_x": 1.0, "sup_abs_ux": 1.0}
        body = _problem_error(self._post(client, plan, res, reg), 422, "regularity_unknown_key")
        assert body["errors"][0]["field"] == "regularity.sup_abs_ux"

    def test_non_finite_value_gives_component_and_index(self, client: TestClient) -> None:
        plan, res = self._setup(client)
        res["interior"][5] = math.nan
        r = client.post(
            "/v1/certificates",
            content=__import__("json").dumps(
                {
                    "problem": self.problem,
                    "plan_id": plan["plan_id"],
                    "regularity": {"sup_abs_u_x": 1.0, "sup_abs_model_u_x": 1.0},
                    "residuals": res,
                }
            ),
            headers={"content-type": "application/json"},
        )
        body = _problem_error(r, 422, "residual_not_finite")
        assert body["errors"][0]["field"] == "residuals.interior"
        assert body["errors"][0]["index"] == 5

    def test_wrong_length(self, client: TestClient) -> None:
        plan, res = self._setup(client)
        res["boundary"] = res["boundary"][:-1]
        body = _problem_error(self._post(client, plan, res), 422, "residual_length")
        assert body["errors"][0]["field"] == "residuals.boundary"

    def test_missing_component(self, client: TestClient) -> None:
        plan, res = self._setup(client)
        del res["initial"]
        body = _problem_error(self._post(client, plan, res), 422, "residual_missing")
        assert body["errors"][0]["field"] == "residuals.initial"

    def test_broken_base64(self, client: TestClient) -> None:
        plan, res = self._setup(client)
        res["interior"] = {"dtype": "float64", "encoding": "base64", "data": "@@not base64@@"}
        _problem_error(self._post(client, plan, res), 422, "residual_encoding")

    def test_negative_regularity(self, client: TestClient) -> None:
        plan, res = self._setup(client)
        reg = {"sup_abs_u_x": "1 - 2*t", "sup_abs_model_u_x": 1.0}
        _problem_error(self._post(client, plan, res, reg), 422, "regularity_negative")

    def test_unknown_plan(self, client: TestClient) -> None:
        _, res = self._setup(client)
        _problem_error(self._post(client, {"plan_id": "pln_nope"}, res), 404, "plan_not_found")


def test_list_newest_first_and_filter_by_model(client: TestClient) -> None:
    problem: ClassVar[dict[str, Any]] = {
        "equation": "u_t = u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
    }
    plan = client.post("/v1/plans", json={"problem": problem, "points": {"t": 6, "x": 6}}).json()
    ids = []
    for i in range(3):
        res = {c["name"]: [0.001 * (i + 1)] * c["size"] for c in plan["components"]}
        r = client.post(
            "/v1/certificates",
            json={
                "problem": problem,
                "plan_id": plan["plan_id"],
                "regularity": {"sup_abs_u_x": 1.0, "sup_abs_model_u_x": 1.0},
                "residuals": res,
                "model": {"name": "net-a" if i < 2 else "net-b", "version": str(i)},
            },
        )
        ids.append(r.json()["id"])
    listed = client.get("/v1/certificates").json()["items"]
    assert [item["id"] for item in listed] == ids[::-1]
    only_a = client.get("/v1/certificates", params={"model": "net-a"}).json()["items"]
    assert {item["id"] for item in only_a} == set(ids[:2])
    v1 = client.get("/v1/certificates", params={"model": "net-a", "version": "1"}).json()
    assert [item["id"] for item in v1["items"]] == [ids[1]]
    later = client.get("/v1/certificates", params={"created_after": "2999-01-01T00:00:00Z"})
    assert later.status_code == 200 and later.json()["items"] == []


@pytest.mark.parametrize("value", ["-76613", "1700000000", "1.5e9", "2026-01-01T00:00:00"])
def test_listing_dates_are_iso_with_a_timezone(client: TestClient, value: str) -> None:
    """created_before / created_after take ISO 8601 with a timezone; a number (which pydantic
    would read as a Unix time; a schema-fuzzing finding) or a naive time is a 4xx naming the
    field."""
    r = client.get("/v1/certificates", params={"created_before": value})
    assert r.status_code in (400, 422), r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.json()["errors"][0]["field"] == "created_before"


class TestBooleansAreNotNumbers:
    """JSON ``true`` is not a number (found by tools/probe_soundness.py: ``true`` was read
    as 1.0 for a regularity value). Every numeric request field refuses it with 422
    ``validation_error`` and the field at fault, without the union member names."""

    problem: ClassVar[dict[str, Any]] = {
        "equation": "u_t = u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
    }

    def _plan(self, client: TestClient) -> dict[str, Any]:
        r = client.post("/v1/plans", json={"problem": self.problem, "points": {"t": 6, "x": 6}})
        assert r.status_code == 201, r.text
        return r.json()

    def _certify(self, client: TestClient, **change: Any) -> Any:
        plan = self._plan(client)
        body: dict[str, Any] = {
            "problem": self.problem,
            "plan_id": plan["plan_id"],
            "regularity": {"sup_abs_u_x": 1.0, "sup_abs_model_u_x": 1},
            "residuals": {c["name"]: [0.001] * c["size"] for c in plan["components"]},
        }
        for key, value in change.items():
            if key == "interior_value":
                body["residuals"]["interior"][3] = value
            else:
                body[key] = value
        return client.post("/v1/certificates", json=body)

    def test_integers_are_still_numbers(self, client: TestClient) -> None:
        r = self._certify(client)
        assert r.status_code == 201, r.text

    def test_boolean_regularity(self, client: TestClient) -> None:
        reg = {"sup_abs_u_x": True, "sup_abs_model_u_x": 1.0}
        body = _problem_error(self._certify(client, regularity=reg), 422, "validation_error")
        assert body["errors"] == [
            {"field": "regularity.sup_abs_u_x", "message": "Input should be a valid number"}
        ]

    def test_boolean_residual_value_names_the_index(self, client: TestClient) -> None:
        body = _problem_error(self._certify(client, interior_value=False), 422, "validation_error")
        first = body["errors"][0]
        assert first["field"] == "residuals.interior.3" and first["index"] == 3
        assert all("list[" not in e["field"] for e in body["errors"])

    def test_boolean_quadrature_option(self, client: TestClient) -> None:
        r = self._certify(client, quadrature={"residual_bounds": {"interior": True}})
        body = _problem_error(r, 422, "validation_error")
        assert body["errors"][0]["field"] == "quadrature.residual_bounds.interior"

    @pytest.mark.parametrize(
        ("change", "field"),
        [
            ({"time": [0.0, True]}, "problem.time.1"),
            ({"space": {"x": [False, 1.0]}}, "problem.space.x.0"),
            ({"parameters": {"k": True}}, "problem.parameters.k"),
        ],
    )
    def test_boolean_in_the_problem(
        self, client: TestClient, change: dict[str, Any], field: str
    ) -> None:
        r = client.post("/v1/problems", json={"problem": {**self.problem, **change}})
        body = _problem_error(r, 422, "validation_error")
        assert body["errors"][0]["field"] == field

    def test_boolean_plan_count(self, client: TestClient) -> None:
        r = client.post("/v1/plans", json={"problem": self.problem, "points": {"t": True}})
        body = _problem_error(r, 422, "validation_error")
        assert body["errors"][0]["field"] == "points.t"


HEAT_1D = {"equation": "u_t = u_xx", "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]}


@pytest.mark.parametrize(
    ("problem", "request_", "field"),
    [
        (HEAT_1D, {"points": {"t": 3, "x": 16}}, "points.t"),
        (HEAT_1D, {"points": {"t": 5, "x": 16}}, "points.t"),
        (HEAT_1D, {"points": {"t": 16, "x": 2}}, "points.x"),
        (HEAT_1D, {"points": {"t": 16, "x": 4}}, "points.x"),
        (HEAT_1D, {"points": {"t": 8, "x": 5}, "panels": {"x": 4}}, "points.x"),
        (HEAT_1D, {"rule": "sobol", "n": 256, "replicates": 4, "points": {"t": 4}}, "points.t"),
        (
            {"equation": "y_t = -y", "unknowns": ["y"], "time": [0.0, 1.0]},
            {"points": {"t": 1}},
            "points.t",
        ),
    ],
)
def test_gauss_plans_below_six_nodes_are_refused(
    client: TestClient, problem: dict[str, Any], request_: dict[str, Any], field: str
) -> None:
    """Fewer than 6 Gauss-Legendre nodes per panel on any Gauss axis (the time axis of a
    Sobol plan too): 422 plan_invalid naming the axis (the probe found bounds below the true
    error on 3- and 4-node axes; docs/api.md, "Coarse Gauss-Legendre panels")."""
    r = client.post("/v1/plans", json={"problem": problem, **request_})
    body = _problem_error(r, 422, "plan_invalid")
    assert body["errors"][0]["field"] == field
    assert "at least 6 Gauss-Legendre nodes per panel" in body["detail"]


def test_gauss_plan_with_six_nodes_is_accepted(client: TestClient) -> None:
    r = client.post("/v1/plans", json={"problem": HEAT_1D, "points": {"t": 6, "x": 6}})
    assert r.status_code == 201, r.text
    assert not r.json()["warnings"]
