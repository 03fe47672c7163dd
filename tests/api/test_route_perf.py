"""Route fast paths (issue 4): problems stored once, cached bodies, the JSON certificate route.

The behaviour checked is the wire contract's (docs/api.md, docs/errors.md): the same answer
for the same problem, a stored problem readable after POST, and the JSON certificate route's
codes and fields for valid and invalid bodies. No timings are asserted.
"""

from __future__ import annotations

import base64
import json
from collections.abc import Iterator
from typing import Any

import numpy as np
import pytest
from sqlalchemy import text

from boundsvc.api import build_app
from boundsvc.api.routes import certificates as cert_routes
from boundsvc.store import Store, open_store, upgrade
from tests.api.support import HEAT_PROBLEM, prepare
from tests.inprocess import InProcessClient


@pytest.fixture
def served(tmp_path: Any) -> Iterator[tuple[InProcessClient, Store]]:
    url = f"sqlite:///{tmp_path / 'perf.sqlite3'}"
    upgrade(url)
    store = open_store(url)
    client = InProcessClient(build_app(store=store))
    try:
        yield client, store
    finally:
        client.close()
        store.dispose()


def _count_writes(store: Store, monkeypatch: pytest.MonkeyPatch) -> list[str]:
    writes: list[str] = []
    original = store.put_problem

    def spy(id: str, *args: Any, **kwargs: Any) -> Any:
        writes.append(id)
        return original(id, *args, **kwargs)

    monkeypatch.setattr(store, "put_problem", spy)
    return writes


def test_problem_posted_twice_is_stored_once_and_answered_identically(
    served: tuple[InProcessClient, Store], monkeypatch: pytest.MonkeyPatch
) -> None:
    client, store = served
    writes = _count_writes(store, monkeypatch)
    first = client.post("/v1/problems", json={"problem": HEAT_PROBLEM})
    second = client.post("/v1/problems", json={"problem": HEAT_PROBLEM})
    assert first.status_code == second.status_code == 200
    assert first.content == second.content
    pid = first.json()["problem_id"]
    assert writes == [pid]
    assert store.get_problem(pid) is not None
    fetched = client.get(f"/v1/problems/{pid}")
    assert fetched.status_code == 200
    assert fetched.json()["family"] == first.json()["family"]


def test_problem_is_stored_again_after_the_store_was_emptied(
    served: tuple[InProcessClient, Store], monkeypatch: pytest.MonkeyPatch
) -> None:
    client, store = served
    first = client.post("/v1/problems", json={"problem": HEAT_PROBLEM})
    pid = first.json()["problem_id"]
    with store._engines.write.begin() as conn:  # the database reset behind the process
        conn.execute(text("DELETE FROM problems"))
    assert store.get_problem(pid) is None
    writes = _count_writes(store, monkeypatch)
    again = client.post("/v1/problems", json={"problem": HEAT_PROBLEM})
    assert again.status_code == 200 and again.content == first.content
    assert writes == [pid]
    assert store.get_problem(pid) is not None
    plan = client.post("/v1/plans", json={"problem_id": pid, "points": {"t": 6, "x": 6}})
    assert plan.status_code == 201, plan.text


def test_regularity_warning_is_not_shared_between_bodies(
    served: tuple[InProcessClient, Store],
) -> None:
    client, _ = served
    plain = client.post("/v1/problems", json={"problem": HEAT_PROBLEM}).json()
    keys = plain["required_regularity"]
    with_reg = client.post(
        "/v1/problems", json={"problem": HEAT_PROBLEM, "regularity": dict.fromkeys(keys, 3.0)}
    ).json()
    assert plain["warnings"] != with_reg["warnings"]
    assert plain["problem_id"] == with_reg["problem_id"]


def _b64(values: np.ndarray, dtype: str = "<f8") -> str:
    return base64.b64encode(np.asarray(values, dtype=dtype).tobytes()).decode()


@pytest.fixture
def request_parts(served: tuple[InProcessClient, Store]) -> dict[str, Any]:
    client, _ = served
    regularity, plan = prepare(client)
    rng = np.random.default_rng(4)
    arrays = {c["name"]: rng.uniform(-1e-3, 1e-3, c["size"]) for c in plan["components"]}
    return {"regularity": regularity, "plan": plan, "arrays": arrays}


def _body(parts: dict[str, Any], residuals: dict[str, Any], **extra: Any) -> dict[str, Any]:
    return {
        "problem": HEAT_PROBLEM,
        "regularity": parts["regularity"],
        "plan_id": parts["plan"]["plan_id"],
        "residuals": residuals,
        **extra,
    }


def test_base64_and_lists_give_the_same_certificate(
    served: tuple[InProcessClient, Store],
    request_parts: dict[str, Any],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    client, _ = served
    decoded: list[str] = []
    original = cert_routes._decode_base64_residuals

    def spy(body: Any) -> None:
        decoded.append("called")
        original(body)

    monkeypatch.setattr(cert_routes, "_decode_base64_residuals", spy)
    arrays = request_parts["arrays"]
    lists = client.post(
        "/v1/certificates", json=_body(request_parts, {k: v.tolist() for k, v in arrays.items()})
    )
    encoded = client.post(
        "/v1/certificates",
        json=_body(request_parts, {k: {"data": _b64(v)} for k, v in arrays.items()}),
    )
    assert lists.status_code == encoded.status_code == 201, encoded.text
    assert lists.json()["id"] == encoded.json()["id"]  # same arrays, same inputs digest
    assert decoded  # the route of this module served the requests


@pytest.mark.parametrize(
    ("mutate", "status", "code", "field"),
    [
        (lambda r: r.update(interior={"data": "!!not base64"}), 422, "residual_encoding", None),
        (lambda r: r.update(interior={"data": "QUJDREVGRw=="}), 422, "residual_encoding", None),
        (
            lambda r: r.update(interior={"data": "QUJD", "dtype": "int8"}),
            422,
            "validation_error",
            "residuals.interior",
        ),
        (
            lambda r: r.update(interior={"data": "QUJD", "x": 1}),
            422,
            "validation_error",
            "residuals.interior",
        ),
        (
            lambda r: r.update(nosuch={"data": "@@"}),
            422,
            "residual_unknown_component",
            "residuals.nosuch",
        ),
        (lambda r: r.pop("interior"), 422, "residual_missing", "residuals.interior"),
    ],
)
def test_invalid_base64_bodies_keep_their_codes(
    served: tuple[InProcessClient, Store],
    request_parts: dict[str, Any],
    mutate: Any,
    status: int,
    code: str,
    field: str | None,
) -> None:
    client, _ = served
    residuals = {k: {"data": _b64(v)} for k, v in request_parts["arrays"].items()}
    mutate(residuals)
    r = client.post("/v1/certificates", json=_body(request_parts, residuals))
    assert r.status_code == status, r.text
    problem = r.json()
    assert problem["code"] == code
    assert r.headers["content-type"].startswith("application/problem+json")
    if field is not None:
        assert problem["errors"][0]["field"].startswith(field)


@pytest.mark.parametrize(
    ("raw", "content_type", "status", "code"),
    [
        (b'{"problem": ', "application/json", 400, "invalid_json"),
        (b"", "application/json", 422, "validation_error"),
        (b"[1, 2]", "application/json", 422, "validation_error"),
        (b'{"problem": {}}', "text/plain", 422, "validation_error"),
        (b"\xff\xfe{", "application/json", 400, "invalid_query"),
        (b"[" * 3000 + b"]" * 3000, "application/json", 400, "invalid_query"),
    ],
)
def test_malformed_bodies_answer_as_before(
    served: tuple[InProcessClient, Store],
    raw: bytes,
    content_type: str,
    status: int,
    code: str,
) -> None:
    client, _ = served
    r = client.post("/v1/certificates", content=raw, headers={"content-type": content_type})
    assert r.status_code == status, r.text
    assert r.json()["code"] == code


def test_stdlib_only_json_is_still_accepted(
    served: tuple[InProcessClient, Store], request_parts: dict[str, Any]
) -> None:
    """orjson refuses a UTF-8 BOM and NaN; FastAPI's json module accepted them: so do we."""
    client, _ = served
    body = _body(request_parts, {k: v.tolist() for k, v in request_parts["arrays"].items()})
    raw = json.dumps(body).encode()
    bom = client.post(
        "/v1/certificates",
        content=b"\xef\xbb\xbf" + raw,
        headers={"content-type": "application/json"},
    )
    assert bom.status_code == 201, bom.text
    nan = client.post(
        "/v1/certificates",
        content=raw.replace(b"]", b", NaN]", 1),
        headers={"content-type": "application/json"},
    )
    assert nan.status_code == 422 and nan.json()["code"] == "validation_error"


def test_openapi_documents_the_certificate_request_body(
    served: tuple[InProcessClient, Store],
) -> None:
    client, _ = served
    doc = client.get("/openapi.json").json()
    operation = doc["paths"]["/v1/certificates"]["post"]
    schema = operation["requestBody"]["content"]["application/json"]["schema"]
    assert schema == {"$ref": "#/components/schemas/CertificateRequest"}
    assert "CertificateRequest" in doc["components"]["schemas"]
    assert "EncodedArray" in doc["components"]["schemas"]
