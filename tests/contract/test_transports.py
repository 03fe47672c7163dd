"""Residual transports (JSON, base64, .npz, octet-stream) and the other plan rules over HTTP."""

from __future__ import annotations

import base64
import io
import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from boundsvc.api import build_app
from boundsvc.settings import Settings
from boundsvc.store import open_store
from tests.inprocess import InProcessClient

HEAT = {"equation": "u_t = u_xx", "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]}
REG = {"sup_abs_u_x": 2.0, "sup_abs_model_u_x": 2.5}


@pytest.fixture
def client(tmp_path: Path) -> Iterator[InProcessClient]:
    store = open_store(f"sqlite:///{tmp_path}/t.sqlite3")
    c = InProcessClient(build_app(Settings(database_url="unused"), store))
    yield c
    c.close()
    store.dispose()


def _plan(client: InProcessClient, **extra: Any) -> dict[str, Any]:
    r = client.post("/v1/plans", json={"problem": HEAT, **extra})
    assert r.status_code == 201, r.text
    return dict(r.json())


def _arrays(plan: dict[str, Any], seed: int = 1) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    return {c["name"]: rng.normal(scale=1e-3, size=c["size"]) for c in plan["components"]}


def _npz(request: dict[str, Any], arrays: dict[str, np.ndarray]) -> bytes:
    buf = io.BytesIO()
    np.savez(buf, request=np.frombuffer(json.dumps(request).encode(), dtype=np.uint8), **arrays)
    return buf.getvalue()


def test_every_transport_gives_the_same_certificate(client: InProcessClient) -> None:
    plan = _plan(client, points={"t": 8, "x": 8})
    arrays = _arrays(plan)
    head = {"problem": HEAT, "plan_id": plan["plan_id"], "regularity": REG}
    as_json = client.post(
        "/v1/certificates", json={**head, "residuals": {k: v.tolist() for k, v in arrays.items()}}
    ).json()
    as_b64 = client.post(
        "/v1/certificates",
        json={
            **head,
            "residuals": {
                k: {
                    "dtype": "float64",
                    "encoding": "base64",
                    "data": base64.b64encode(v.astype("<f8").tobytes()).decode(),
                }
                for k, v in arrays.items()
            },
        },
    ).json()
    npz = client.post(
        "/v1/certificates/upload",
        content=_npz(head, arrays),
        headers={"content-type": "application/x-npz"},
    )
    assert npz.status_code == 201, npz.text
    names = [c["name"] for c in plan["components"]]
    raw = b"".join(arrays[n].astype("<f8").tobytes() for n in names)
    header = base64.urlsafe_b64encode(json.dumps(head).encode()).decode().rstrip("=")
    octet = client.post(
        "/v1/certificates/upload",
        content=raw,
        headers={"content-type": "application/octet-stream", "x-boundsvc-request": header},
    )
    assert octet.status_code == 201, octet.text
    for other in (as_b64, npz.json(), octet.json()):
        assert other["bound"] == as_json["bound"]
        assert other["id"] == as_json["id"]
    assert set(as_json["provenance"]["arrays_sha256"]) == set(names)


def test_octet_stream_length_mismatch_names_the_component(client: InProcessClient) -> None:
    plan = _plan(client, points={"t": 6, "x": 6})
    head = {"problem": HEAT, "plan_id": plan["plan_id"], "regularity": REG}
    header = base64.urlsafe_b64encode(json.dumps(head).encode()).decode()
    r = client.post(
        "/v1/certificates/upload",
        content=b"\x00" * 100,
        headers={"content-type": "application/octet-stream", "x-boundsvc-request": header},
    )
    assert r.status_code == 422
    assert r.json()["code"] == "residual_length"


def test_npz_with_pickled_object_arrays_is_refused(client: InProcessClient) -> None:
    plan = _plan(client, points={"t": 6, "x": 6})
    head = {"problem": HEAT, "plan_id": plan["plan_id"], "regularity": REG}
    buf = io.BytesIO()
    np.savez(
        buf,
        request=np.frombuffer(json.dumps(head).encode(), dtype=np.uint8),
        interior=np.array([{"a": 1}], dtype=object),
    )
    r = client.post(
        "/v1/certificates/upload",
        content=buf.getvalue(),
        headers={"content-type": "application/x-npz"},
    )
    assert r.status_code == 422 and r.json()["code"] == "residual_encoding"
    broken = client.post(
        "/v1/certificates/upload",
        content=b"PK\x03\x04broken",
        headers={"content-type": "application/x-npz"},
    )
    assert broken.status_code == 422 and broken.json()["code"] == "residual_encoding"


def test_float32_interior_gets_a_rounding_term_and_boundary_must_be_float64(
    client: InProcessClient,
) -> None:
    plan = _plan(client, points={"t": 8, "x": 8})
    arrays = _arrays(plan)
    head = {"problem": HEAT, "plan_id": plan["plan_id"], "regularity": REG}
    ref = client.post(
        "/v1/certificates/upload",
        content=_npz(head, arrays),
        headers={"content-type": "application/x-npz"},
    ).json()
    single = {**arrays, "interior": arrays["interior"].astype(np.float32)}
    r = client.post(
        "/v1/certificates/upload",
        content=_npz(head, single),
        headers={"content-type": "application/x-npz"},
    )
    assert r.status_code == 201, r.text
    promoted = single["interior"].astype(np.float64)
    lowest = client.post(
        "/v1/certificates/upload",
        content=_npz(head, {**arrays, "interior": promoted}),
        headers={"content-type": "application/x-npz"},
    )
    assert r.json()["bound"]["l2_final_time"] >= lowest.json()["bound"]["l2_final_time"]
    assert ref["bound"]["l2_final_time"] > 0
    bad = {**arrays, "boundary": arrays["boundary"].astype(np.float32)}
    r = client.post(
        "/v1/certificates/upload",
        content=_npz(head, bad),
        headers={"content-type": "application/x-npz"},
    )
    assert r.status_code == 422 and r.json()["code"] == "residual_dtype"


def test_sobol_plan_in_the_contract_form_gives_a_statistical_certificate(
    client: InProcessClient,
) -> None:
    plan = _plan(client, rule="sobol", n=4096, replicates=8)
    arrays = _arrays(plan)
    r = client.post(
        "/v1/certificates",
        json={
            "problem": HEAT,
            "plan_id": plan["plan_id"],
            "regularity": REG,
            "residuals": {k: v.tolist() for k, v in arrays.items()},
            "quadrature": {"confidence": 0.9},
        },
    )
    assert r.status_code == 201, r.text
    cert = r.json()
    quad = cert["quadrature"]
    assert {s["rigor"] for s in quad["statements"]} >= {"statistical"}
    assert 0 < quad["failure_probability"] <= 0.1 + 1e-12
    assert any(
        t["name"] == "quadrature allowance" and t["rigor"] == "statistical" for t in cert["terms"]
    )
    assert cert["rigor"] == "heuristic" or cert["rigor"] == "statistical"
    assert len(cert["time_profile"]["t"]) > 2


def test_monte_carlo_grid_and_custom_plans(client: InProcessClient) -> None:
    for extra in (
        {"rule": "monte-carlo", "n": 512, "points": {"t": 8}},
        {"rule": "grid", "points": {"t": 9, "x": 17}},
        {"rule": "grid", "weights": "simpson", "points": {"t": 9, "x": 17}},
    ):
        plan = _plan(client, **extra)
        arrays = _arrays(plan)
        r = client.post(
            "/v1/certificates",
            json={
                "problem": HEAT,
                "plan_id": plan["plan_id"],
                "regularity": REG,
                "residuals": {k: v.tolist() for k, v in arrays.items()},
            },
        )
        assert r.status_code == 201, (extra, r.text)
        assert r.json()["bound"]["l2_final_time"] > 0
    # custom: the client's own points, inline in the certificate request
    grid = _plan(client, rule="grid", points={"t": 5, "x": 5})
    inline = {
        c["name"]: {"axes": c["axes"], "points": c["points"], "weights": c["weights"]}
        for c in grid["components"]
    }
    arrays = _arrays(grid)
    r = client.post(
        "/v1/certificates",
        json={
            "problem": HEAT,
            "plan": inline,
            "regularity": REG,
            "residuals": {k: v.tolist() for k, v in arrays.items()},
        },
    )
    assert r.status_code == 201, r.text
    assert any("custom points" in w for w in r.json()["warnings"])


def test_plan_formats_agree(client: InProcessClient) -> None:
    rows = _plan(client, points={"t": 6, "x": 6})
    pid = rows["plan_id"]
    b64 = client.get(f"/v1/plans/{pid}", params={"format": "base64"}).json()
    npz = client.get(f"/v1/plans/{pid}", params={"format": "npz"})
    assert npz.headers["content-type"] == "application/x-npz"
    archive = np.load(io.BytesIO(npz.content), allow_pickle=False)
    meta = json.loads(archive["meta"].tobytes())
    assert meta["plan_id"] == pid
    for comp, enc in zip(rows["components"], b64["components"], strict=True):
        pts = np.frombuffer(base64.b64decode(enc["points"]["data"]), "<f8").reshape(
            enc["points"]["shape"]
        )
        np.testing.assert_array_equal(pts, np.asarray(comp["points"]))
        np.testing.assert_array_equal(archive[f"{comp['name']}.weights"], comp["weights"])
    assert rows["axis_nodes"]["x"] and len(rows["time_nodes"]) == 6
