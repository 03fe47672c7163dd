"""The real client against the real app, in this process (no sockets).

The surrogate is a closed form with a known error: ``u_model = u + eps t sin(pi x)`` for the
exact heat solution ``u = exp(-k pi^2 t) sin(pi x)`` (Strauss, *PDEs*, 2nd ed., ch. 4), so the
true final-time error is ``eps T / sqrt(2)`` and the certified bound must be above it.
"""

from __future__ import annotations

import asyncio
import math
from collections.abc import Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest

from boundsvc.client import (
    AsyncBoundsvcClient,
    BoundsvcClient,
    BoundsvcClientError,
    Plan,
    PlanEvaluator,
)
from tests.cli.inprocess import BASE_URL, build_test_app, client_of
from tests.client.test_adapters import HEAT, K

EPS = 1e-3
T_END = 0.5


class PerturbedHeat:
    def __call__(self, points: np.ndarray, names: Sequence[str]) -> Mapping[str, Any]:
        t, x = points[:, 0], points[:, 1]
        d = np.exp(-K * np.pi**2 * t)
        s, c = np.sin(np.pi * x), np.cos(np.pi * x)
        table = {
            "u": d * s + EPS * t * s,
            "u_t": -K * np.pi**2 * d * s + EPS * s,
            "u_x": np.pi * d * c + EPS * t * np.pi * c,
            "u_xx": -(np.pi**2) * (d + EPS * t) * s,
        }
        return {n: table[n] for n in names}


REGULARITY = {"sup_abs_u_x": "pi*exp(-0.4*pi^2*t)", "sup_abs_model_u_x": math.pi * (1 + EPS)}


@pytest.fixture(scope="module")
def app(tmp_path_factory: pytest.TempPathFactory) -> Any:
    return build_test_app(tmp_path_factory.mktemp("roundtrip"))


@pytest.fixture
def client(app: Any) -> Iterator[BoundsvcClient]:
    with client_of(app) as c:
        yield c


def residuals(plan: Plan) -> dict[str, np.ndarray]:
    ev = PlanEvaluator.for_problem(PerturbedHeat(), HEAT)
    return ev.residuals(
        plan,
        lambda f: f["u_t"] - K * f["u_xx"],
        names=("u_t", "u_xx"),
        initial_value=lambda x: np.sin(np.pi * x),
        boundary_value=lambda t, x: 0.0 * x,
    )


def test_full_round_trip(client: BoundsvcClient) -> None:
    assert client.health()["status"] == "ok"
    assert any(f.id == "linear-advection-diffusion-reaction" for f in client.families())
    info = client.problem(HEAT)
    assert info.family == "linear-advection-diffusion-reaction"
    assert "sup_abs_u_x" in info.required_regularity
    plan = client.plan(info.problem_id, points={"t": 12, "x": 12})
    assert plan.sizes == {"interior": 144, "initial": 12, "boundary": 24}
    assert plan["interior"].weights.sum() == pytest.approx(0.5)
    again = client.get_plan(plan.plan_id)
    assert np.array_equal(again["boundary"].points, plan["boundary"].points)

    cert = client.certify(
        info.problem_id,
        plan,
        REGULARITY,
        residuals(plan),
        model={"name": "roundtrip-heat", "version": "1", "epoch": 3},
    )
    assert cert.status == "valid"
    true_final = EPS * T_END / math.sqrt(2)
    assert cert.bound.l2_final_time is not None and cert.bound.l2_final_time >= true_final
    assert cert.model is not None and cert.model.epoch == 3
    assert client.certificate(cert.id) == cert
    listed = list(client.certificates(model="roundtrip-heat", version="1"))
    assert [s.id for s in listed] == [cert.id]
    latest = client.latest_certificate("roundtrip-heat")
    assert latest is not None and latest.id == cert.id


def test_base64_and_json_residuals_give_the_same_certificate(client: BoundsvcClient) -> None:
    plan = client.plan(HEAT, points={"t": 8, "x": 8})
    res = residuals(plan)
    a = client.certify(HEAT, plan, REGULARITY, res, encoding="base64")
    b = client.certify(
        HEAT, plan.plan_id, REGULARITY, {k: v.tolist() for k, v in res.items()}, encoding="json"
    )
    assert a.id == b.id  # the id hashes the decoded arrays: both encodings are exact


def test_service_errors_come_back_typed(client: BoundsvcClient) -> None:
    plan = client.plan(HEAT, points={"t": 6, "x": 6})
    res = residuals(plan)
    with pytest.raises(BoundsvcClientError) as info:
        client.certify(HEAT, plan, {"sup_abs_u_x": 3.0}, res)
    err = info.value
    assert (err.status, err.code) == (422, "regularity_missing")
    assert err.errors and err.errors[0].field.startswith("regularity.")
    assert err.request_id
    with pytest.raises(BoundsvcClientError) as info:
        client.certify(HEAT, plan, REGULARITY, {**res, "interior": res["interior"][:-1]})
    assert info.value.code == "residual_length"
    with pytest.raises(BoundsvcClientError) as info:
        client.certificate("crt_does_not_exist")
    assert (info.value.status, info.value.code) == (404, "certificate_not_found")
    with pytest.raises(BoundsvcClientError) as info:
        client.problem({**HEAT, "equation": "u_t = u_xx + foo("})
    assert info.value.status == 422


def test_async_client_in_process(app: Any) -> None:
    async def go() -> tuple[str, str]:
        transport = httpx.ASGITransport(app=app)
        async with AsyncBoundsvcClient(BASE_URL, transport=transport) as client:
            info = await client.problem(HEAT)
            plan = await client.plan(info.problem_id, points={"t": 6, "x": 6})
            cert = await client.certify(info.problem_id, plan, REGULARITY, residuals(plan))
            return info.family, (await client.certificate(cert.id)).status

    assert asyncio.run(go()) == ("linear-advection-diffusion-reaction", "valid")


def test_plan_saved_to_disk_certifies_later(client: BoundsvcClient, tmp_path: Path) -> None:
    plan = client.plan(HEAT, points={"t": 6, "x": 6})
    plan.save(tmp_path / "plan.npz")
    loaded = Plan.load(tmp_path / "plan.npz")
    cert = client.certify(loaded.problem_id, loaded, REGULARITY, residuals(loaded))
    assert cert.provenance.plan_id == plan.plan_id


def test_api_key_from_the_environment_is_accepted(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    from boundsvc.api import build_app
    from boundsvc.settings import Settings
    from boundsvc.store import open_store

    url = f"sqlite:///{tmp_path / 'keys.sqlite3'}"
    store = open_store(url)
    _, token = store.create_api_key("team-a", "ci", ["read", "write"])
    app = build_app(Settings(database_url=url), store)
    with client_of(app) as anonymous, pytest.raises(BoundsvcClientError) as info:
        anonymous.problem(HEAT)  # a key exists: anonymous callers are refused
    assert (info.value.status, info.value.code) == (401, "unauthorized")
    monkeypatch.setenv("BOUNDSVC_API_KEY", token)
    with client_of(app) as client:
        plan = client.plan(HEAT, points={"t": 6, "x": 6})
        cert = client.certify(HEAT, plan, REGULARITY, residuals(plan), model={"name": "keyed"})
        assert [s.project for s in client.certificates(model="keyed")] == ["team-a"]
        assert client.certificate(cert.id).id == cert.id
    store.dispose()


def test_sobol_plan_and_lifting_component_through_the_client(client: BoundsvcClient) -> None:
    """Every plan rule is reachable from the client: a scrambled Sobol plan (its interior
    points are a base-2 net per replicate) and a Gauss-Legendre plan with the optional
    ``boundary_t`` component of the boundary lifting."""
    sobol = client.plan(HEAT, rule="sobol", n=6 * 16, replicates=4, seed=7, points={"t": 6})
    assert (
        sobol.plan_id
        == client.plan(HEAT, rule="sobol", n=6 * 16, replicates=4, seed=7, points={"t": 6}).plan_id
    )  # reproducible from the request
    interior = sobol.components["interior"]
    assert interior.points.shape[0] % 4 == 0
    assert math.isclose(float(interior.weights.sum()), T_END * 1.0, rel_tol=1e-12)
    cert = client.certify(HEAT, sobol, REGULARITY, residuals(sobol))
    assert cert.status == "valid"
    assert cert.bound.l2_final_time is not None
    assert cert.bound.l2_final_time >= EPS * T_END / math.sqrt(2)  # the true final-time error

    lifted = client.plan(HEAT, points={"t": 6, "x": 6}, optional_components=["boundary_t"])
    assert "boundary_t" in lifted.components
    with pytest.raises(TypeError, match="unexpected option"):
        client.plan(HEAT, points={"t": 6, "x": 6}, replicate=3)
