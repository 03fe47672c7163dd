"""Zero-copy decoding of large bodies: the upload body is received into one buffer, stored
``.npz`` members are views into it (CRC-checked), base64 is decoded strictly, and the
array digests are those of the bytes certified. Behaviour only; no timing."""

from __future__ import annotations

import asyncio
import base64
import hashlib
import io
import json
import zipfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from starlette.requests import Request

from api_schemas import EncodedArray
from boundsvc.api import build_app
from boundsvc.api.routes._transport import decode_upload, read_body
from boundsvc.errors import ResidualError
from boundsvc.residuals import _CHUNK, FLOAT32_INFLATION, decode_values, validate_residuals
from boundsvc.settings import Settings
from boundsvc.store import open_store
from tests.inprocess import InProcessClient

HEAT = {"equation": "u_t = u_xx", "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]}
REG = {"sup_abs_u_x": 2.0, "sup_abs_model_u_x": 2.5}


def _npz(arrays: dict[str, np.ndarray], compressed: bool = False) -> bytes:
    buf = io.BytesIO()
    head = json.dumps({"problem": HEAT, "plan_id": "pln_x", "regularity": REG}).encode()
    save = np.savez_compressed if compressed else np.savez
    save(buf, request=np.frombuffer(head, dtype=np.uint8), **arrays)
    return buf.getvalue()


def _body_of(chunks: list[bytes], content_length: int | None) -> bytes | bytearray:
    headers = [] if content_length is None else [(b"content-length", str(content_length).encode())]
    scope = {"type": "http", "method": "POST", "path": "/", "headers": headers}
    messages = [
        {"type": "http.request", "body": c, "more_body": i < len(chunks) - 1}
        for i, c in enumerate(chunks)
    ]

    async def receive() -> dict[str, Any]:
        return messages.pop(0)

    return asyncio.run(read_body(Request(scope, receive)))


@pytest.mark.parametrize("declared", ["exact", "none", "short", "long"])
def test_read_body_returns_exactly_the_bytes_sent(declared: str) -> None:
    chunks = [b"abc", b"", b"defgh", b"ij"]
    whole = b"".join(chunks)
    length = {"exact": len(whole), "none": None, "short": 4, "long": len(whole) + 7}[declared]
    assert bytes(_body_of(chunks, length)) == whole


def test_stored_npz_members_are_views_into_the_body() -> None:
    rng = np.random.default_rng(2)
    arrays = {"interior": rng.normal(size=1000), "initial": rng.normal(size=(10, 3))}
    body = bytearray(_npz(arrays))
    _, decoded = decode_upload("application/x-npz", body, None)
    for name, arr in arrays.items():
        np.testing.assert_array_equal(decoded[name], arr)
        assert np.shares_memory(decoded[name], np.frombuffer(body, dtype=np.uint8))
    _, packed = decode_upload("application/x-npz", bytearray(_npz(arrays, compressed=True)), None)
    for name, arr in arrays.items():
        np.testing.assert_array_equal(packed[name], arr)


def test_a_damaged_npz_member_is_refused_not_read() -> None:
    values = np.arange(64, dtype="<f8")
    body = bytearray(_npz({"interior": values}))
    at = bytes(body).find(values[5:7].tobytes())
    body[at] ^= 0xFF  # one flipped byte inside the stored array: the CRC-32 no longer matches
    with pytest.raises(ResidualError) as err:
        decode_upload("application/x-npz", body, None)
    assert err.value.code == "residual_encoding"
    with zipfile.ZipFile(io.BytesIO(bytes(body))) as z, pytest.raises(zipfile.BadZipFile):
        z.read("interior.npy")  # the standard reader agrees that the member is damaged


@pytest.mark.parametrize("data", ["AAAA AAA=", "AAAAAAA", "=AAAAAAA", "AAAA====", "AA-_AAAA"])
def test_base64_is_decoded_strictly(data: str) -> None:
    with pytest.raises(ResidualError) as err:
        decode_values("interior", EncodedArray(dtype="float64", data=data), 1)
    assert err.value.code == "residual_encoding"


def test_float32_values_are_inflated_by_the_rounding_factor() -> None:
    r32 = np.array([1.0, -3.5e-3, 7.25e4], dtype="<f4")
    enc = EncodedArray(dtype="float32", data=base64.b64encode(r32.tobytes()).decode())
    out = decode_values("interior", enc, 1)
    assert out.dtype == np.float64
    np.testing.assert_array_equal(out, r32.astype(np.float64) * FLOAT32_INFLATION)
    assert np.all(np.abs(out) > np.abs(r32.astype(np.float64)))


def test_digest_and_first_non_finite_index_across_blocks() -> None:
    plan = _small_plan(_CHUNK + 50)
    values = np.random.default_rng(3).normal(size=_CHUNK + 50)
    arrays, digests = validate_residuals(plan, {"interior": values}, ["interior"])
    assert digests["interior"] == hashlib.sha256(values.tobytes()).hexdigest()
    assert np.shares_memory(arrays["interior"], values)
    values[_CHUNK + 7] = np.nan
    with pytest.raises(ResidualError) as err:
        validate_residuals(plan, {"interior": values}, ["interior"])
    assert err.value.code == "residual_not_finite" and err.value.index == _CHUNK + 7


def _small_plan(n: int) -> Any:
    from boundsvc.quadrature import Plan
    from boundsvc.quadrature._plan import Component

    comp = Component("interior", ("x",), np.zeros((n, 1)), np.ones(n))
    return Plan("pln_t", "custom", {}, {"interior": comp}, None)


@pytest.fixture
def client(tmp_path: Path) -> Iterator[InProcessClient]:
    store = open_store(f"sqlite:///{tmp_path}/t.sqlite3")
    c = InProcessClient(build_app(Settings(database_url="unused"), store))
    yield c
    c.close()
    store.dispose()


def test_octet_and_npz_uploads_agree_with_base64(client: InProcessClient) -> None:
    plan = client.post("/v1/plans", json={"problem": HEAT, "points": {"t": 6, "x": 6}}).json()
    rng = np.random.default_rng(4)
    arrays = {c["name"]: rng.normal(scale=1e-3, size=c["size"]) for c in plan["components"]}
    head = {"problem": HEAT, "plan_id": plan["plan_id"], "regularity": REG}
    b64 = {
        k: {"dtype": "float64", "encoding": "base64", "data": base64.b64encode(v).decode()}
        for k, v in arrays.items()
    }
    ref = client.post("/v1/certificates", json={**head, "residuals": b64})
    assert ref.status_code == 201, ref.text
    buf = io.BytesIO()
    np.savez(buf, request=np.frombuffer(json.dumps(head).encode(), dtype=np.uint8), **arrays)
    npz = client.post(
        "/v1/certificates/upload",
        content=buf.getvalue(),
        headers={"content-type": "application/x-npz"},
    )
    octets = b"".join(arrays[c["name"]].tobytes() for c in plan["components"])
    header = base64.urlsafe_b64encode(json.dumps(head).encode()).decode().rstrip("=")
    octet = client.post(
        "/v1/certificates/upload",
        content=octets,
        headers={"content-type": "application/octet-stream", "x-boundsvc-request": header},
    )
    for r in (npz, octet):
        assert r.status_code == 201, r.text
        assert r.json()["id"] == ref.json()["id"]
        assert r.json()["bound"] == ref.json()["bound"]
