"""Fields mode: the service forms residuals from the model's values and derivatives.

The surrogate is the exact heat solution ``u = exp(-k pi^2 t) sin(pi x)`` (Fourier's method;
Strauss, PDE: An Introduction, 2nd ed. 2008, sec. 4.1) plus ``eps (1 + t) x (1 - x) + eps/10``:
its residuals are written out by hand here, so the certificate from fields must equal the one
from residuals the client computed itself.
"""

from __future__ import annotations

from types import SimpleNamespace
from typing import Any

import numpy as np
import pytest

from api_schemas import ProblemSpec
from boundsvc.certify import build_plan, certify, derive
from boundsvc.errors import ResidualError
from boundsvc.families import problem_sha256

K, EPS = 0.1, 1e-2
PROBLEM = {
    "equation": "u_t = k*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": K},
    "boundary": "dirichlet",
    "initial_value": "sin(pi*x)",
    "boundary_value": "0",
}
REGULARITY = {"sup_abs_u_x": "pi*exp(-0.1*pi^2*t)", "sup_abs_model_u_x": 3.2}


def model(t: np.ndarray, x: np.ndarray) -> dict[str, np.ndarray]:
    d, s = np.exp(-K * np.pi**2 * t), np.sin(np.pi * x)
    bump = (1 + t) * x * (1 - x) + 0.1
    return {
        "u": d * s + EPS * bump,
        "u_t": -K * np.pi**2 * d * s + EPS * x * (1 - x),
        "u_xx": -(np.pi**2) * d * s - 2 * EPS * (1 + t),
    }


def setup(problem: dict[str, Any] = PROBLEM) -> tuple[Any, str, Any]:
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(
        classified, {"problem_id": pid, "rule": "gauss-legendre", "points": {"t": 8, "x": 8}}
    )
    return classified, pid, plan


def fields_for(plan: Any) -> dict[str, dict[str, list[float]]]:
    pi = plan.components["interior"].points
    f_int = model(pi[:, 0], pi[:, 1])
    x0 = plan.components["initial"].points[:, 0]
    pb = plan.components["boundary"].points
    return {
        "interior": {"u_t": f_int["u_t"].tolist(), "u_xx": f_int["u_xx"].tolist()},
        "initial": {"u": model(np.zeros_like(x0), x0)["u"].tolist()},
        "boundary": {"u": model(pb[:, 0], pb[:, 1])["u"].tolist()},
    }


def residuals_by_hand(plan: Any) -> dict[str, list[float]]:
    pi = plan.components["interior"].points
    f = model(pi[:, 0], pi[:, 1])
    x0 = plan.components["initial"].points[:, 0]
    pb = plan.components["boundary"].points
    return {
        "interior": (f["u_t"] - K * f["u_xx"]).tolist(),
        "initial": (model(np.zeros_like(x0), x0)["u"] - np.sin(np.pi * x0)).tolist(),
        "boundary": model(pb[:, 0], pb[:, 1])["u"].tolist(),
    }


def test_fields_give_the_certificate_of_the_hand_made_residuals() -> None:
    classified, pid, plan = setup()
    by_hand = certify(classified, pid, plan, REGULARITY, residuals_by_hand(plan), None).document
    from_fields = certify(
        classified, pid, plan, REGULARITY, {}, None, fields=fields_for(plan)
    ).document
    assert by_hand["status"] == from_fields["status"] == "valid"
    for key in ("l2_space_time", "l2_final_time"):
        assert from_fields["bound"][key] == pytest.approx(by_hand["bound"][key], rel=1e-12)
    # the true error eps*bump is below the bound at the final time (||bump(., T)|| > 0.1)
    assert from_fields["bound"]["l2_final_time"] > EPS * 0.1
    digests = from_fields["provenance"]["arrays_sha256"]
    assert {"fields.interior.u_t", "fields.interior.u_xx", "fields.initial.u"} <= set(digests)


def test_fields_and_residuals_mix_per_component() -> None:
    classified, pid, plan = setup()
    fields = fields_for(plan)
    residuals = residuals_by_hand(plan)
    mixed = certify(
        classified,
        pid,
        plan,
        REGULARITY,
        {"boundary": residuals["boundary"]},
        None,
        fields={"interior": fields["interior"], "initial": fields["initial"]},
    ).document
    whole = certify(classified, pid, plan, REGULARITY, residuals, None).document
    assert mixed["bound"]["l2_space_time"] == pytest.approx(
        whole["bound"]["l2_space_time"], rel=1e-12
    )


def _error(fields: dict[str, Any], residuals: dict[str, Any] | None = None, **problem: Any):
    classified, pid, plan = setup({**PROBLEM, **problem})
    with pytest.raises(ResidualError) as info:
        certify(classified, pid, plan, REGULARITY, residuals or {}, None, fields=fields(plan))
    return info.value


def test_a_missing_field_names_it() -> None:
    def fields(plan: Any) -> dict[str, Any]:
        f = fields_for(plan)
        del f["interior"]["u_xx"]
        return f

    err = _error(fields)
    assert (err.code, err.field) == ("residual_missing", "fields.interior.u_xx")


def test_a_superfluous_or_unknown_field_is_refused() -> None:
    def extra(plan: Any) -> dict[str, Any]:
        f = fields_for(plan)
        f["interior"]["u_x"] = f["interior"]["u_t"]
        return f

    err = _error(extra)
    assert (err.code, err.field) == ("fields_invalid", "fields.interior.u_x")

    def unknown(plan: Any) -> dict[str, Any]:
        f = fields_for(plan)
        f["interior"]["v_t"] = f["interior"]["u_t"]
        return f

    assert _error(unknown).field == "fields.interior.v_t"


def test_data_the_problem_lacks_and_double_sending_are_refused() -> None:
    no_initial = {k: v for k, v in PROBLEM.items() if k != "initial_value"}
    classified, pid, plan = setup(no_initial)
    with pytest.raises(ResidualError) as info:
        certify(classified, pid, plan, REGULARITY, {}, None, fields=fields_for(plan))
    assert (info.value.code, info.value.field) == ("fields_invalid", "fields.initial")

    classified, pid, plan = setup()
    with pytest.raises(ResidualError) as info:
        certify(
            classified,
            pid,
            plan,
            REGULARITY,
            residuals_by_hand(plan),
            None,
            fields=fields_for(plan),
        )
    assert info.value.code == "fields_invalid"


def test_bad_values_name_the_field_and_the_index() -> None:
    def short(plan: Any) -> dict[str, Any]:
        f = fields_for(plan)
        f["interior"]["u_t"] = f["interior"]["u_t"][:-3]
        return f

    err = _error(short)
    assert (err.code, err.field) == ("residual_length", "fields.interior.u_t")

    def nan(plan: Any) -> dict[str, Any]:
        f = fields_for(plan)
        f["initial"]["u"][5] = float("nan")
        return f

    err = _error(nan)
    assert (err.code, err.field, err.index) == ("residual_not_finite", "fields.initial.u", 5)


def test_a_system_gets_one_column_per_equation() -> None:
    """Harmonic oscillator y' = v, v' = -y (a textbook closed form: y = cos t): the fields
    y, y_t, v, v_t of the exact solution give zero residuals in both equations."""
    problem = {
        "equation": ["y' = v", "v' = -y"],
        "unknowns": ["y", "v"],
        "time": [0.0, 1.0],
        "initial_value": ["1", "0"],
    }
    spec = ProblemSpec.model_validate(problem)
    classified = derive(spec)
    pid = "prb_" + problem_sha256(spec)[:32]
    plan = build_plan(classified, {"problem_id": pid, "rule": "gauss-legendre", "points": {"t": 8}})
    from boundsvc.fields import residuals_from_fields

    t = plan.components["interior"].points[:, 0]
    arrays, _ = residuals_from_fields(
        classified,
        plan,
        {
            "interior": {
                "y_t": (-np.sin(t)).tolist(),
                "v": (-np.sin(t)).tolist(),
                "v_t": (-np.cos(t)).tolist(),
                "y": np.cos(t).tolist(),
            },
            "initial": {"y": [1.0], "v": [0.0]},
        },
    )
    assert arrays["interior"].shape == (t.size, 2)
    assert np.max(np.abs(arrays["interior"])) < 1e-15
    assert np.max(np.abs(arrays["initial"])) == 0.0


# -- over HTTP: JSON, base64, an .npz upload, and re-verification from the archive ---------


def test_fields_mode_over_http_and_verified_from_the_archive(tmp_path: Any) -> None:
    import base64
    import io
    import json

    from boundsvc.api import build_app
    from boundsvc.settings import Settings
    from tests.inprocess import InProcessClient

    client = InProcessClient(
        build_app(Settings(database_url=f"sqlite:///{tmp_path / 'fields.sqlite3'}"))
    )
    try:
        plan_body = client.post(
            "/v1/plans", json={"problem": PROBLEM, "points": {"t": 8, "x": 8}}
        ).json()
        plan = SimpleNamespace(
            plan_id=plan_body["plan_id"],
            components={
                c["name"]: SimpleNamespace(points=np.asarray(c["points"], dtype=float))
                for c in plan_body["components"]
            },
        )
        fields = fields_for(plan)
        head = {"problem": PROBLEM, "plan_id": plan.plan_id, "regularity": REGULARITY}
        by_hand = client.post(
            "/v1/certificates", json={**head, "residuals": residuals_by_hand(plan)}
        )
        as_lists = client.post("/v1/certificates", json={**head, "fields": fields, "archive": True})
        b64 = {
            c: {
                n: {
                    "dtype": "float64",
                    "encoding": "base64",
                    "data": base64.b64encode(np.asarray(v, dtype="<f8").tobytes()).decode(),
                }
                for n, v in f.items()
            }
            for c, f in fields.items()
        }
        as_b64 = client.post("/v1/certificates", json={**head, "fields": b64})
        buffer = io.BytesIO()
        members = {
            f"fields.{c}.{n}": np.asarray(v, dtype="<f8")
            for c, f in fields.items()
            for n, v in f.items()
        }
        np.savez(
            buffer, request=np.frombuffer(json.dumps(head).encode(), dtype=np.uint8), **members
        )
        as_npz = client.post(
            "/v1/certificates/upload",
            content=buffer.getvalue(),
            headers={"content-type": "application/x-npz"},
        )
        for response in (by_hand, as_lists, as_b64, as_npz):
            assert response.status_code == 201, response.text
        reference = by_hand.json()["bound"]["l2_space_time"]
        for response in (as_lists, as_b64, as_npz):
            assert response.json()["bound"]["l2_space_time"] == pytest.approx(reference, rel=1e-12)
        # lists and base64 of the same float64 fields are the same inputs: the same certificate
        assert as_lists.json()["id"] == as_b64.json()["id"] == as_npz.json()["id"]
        report = client.post(f"/v1/certificates/{as_lists.json()['id']}/verify", json={})
        assert report.status_code == 200, report.text
        assert report.json()["matches"] is True, report.json()["differences"]
        bad = client.post(
            "/v1/certificates",
            json={**head, "fields": {**fields, "interior": {"u_t": fields["interior"]["u_t"]}}},
        )
        assert bad.status_code == 422
        assert bad.json()["code"] == "residual_missing"
        assert [e["field"] for e in bad.json()["errors"]] == ["fields.interior.u_xx"]
    finally:
        client.close()
