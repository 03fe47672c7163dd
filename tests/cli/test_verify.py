"""``boundsvc verify`` and the clients' ``verify``: every exit code (0 match, 1 mismatch or not
verifiable, 2 usage, 3 service), human and JSON output."""

from __future__ import annotations

import asyncio
import hashlib
from typing import Any

import httpx
import pytest
import sqlalchemy as sa

from boundsvc.client import AsyncBoundsvcClient, BoundsvcClientError
from boundsvc.store import decode_residual_archive, encode_residual_archive
from tests.cli.conftest import Runner, Stored
from tests.cli.inprocess import client_of
from tests.client.test_adapters import HEAT
from tests.client.test_roundtrip import REGULARITY, residuals


def _archived(app: Any, scale: float = 1.0) -> str:
    """A new archived certificate (residuals scaled so that each call is a new one)."""
    with client_of(app) as client:
        plan = client.plan(HEAT, points={"t": 8, "x": 8})
        arrays = {k: scale * v for k, v in residuals(plan).items()}
        cert = client.certify(HEAT, plan, REGULARITY, arrays, archive=True)
        info = client.archive_info(cert.id)
    assert info.certificate_id == cert.id and info.size_bytes > 0
    return cert.id


def test_a_matching_certificate_exits_0(app: Any, run: Runner) -> None:
    cid = _archived(app, 1.5)
    text = run("verify", cid)
    assert text.code == 0, text.err
    assert f"certificate {cid}: matches" in text.out
    assert "l2_space_time: stored" in text.out
    as_json = run("verify", cid, "--json", "--rtol", "0.001")
    assert as_json.code == 0
    report = as_json.json()
    assert report["matches"] is True and report["rtol"] == 0.001
    assert report["certificate_id"] == cid


def test_a_certificate_without_archive_exits_1(run: Runner, stored: Stored) -> None:
    result = run("verify", stored.certificate_id, "--json")
    assert result.code == 1
    assert result.json()["error"]["code"] == "not_archived"
    assert run("verify", "crt_" + "f" * 32).code == 1


def test_a_tampered_archive_exits_1_and_names_what_changed(app: Any, run: Runner) -> None:
    cid = _archived(app, 2.5)
    store = app.state.store
    archive = store.get_archive(cid)
    contents = decode_residual_archive(archive.blob, archive.codec)
    arrays = {**contents.arrays, "interior": 10.0 * contents.arrays["interior"]}
    blob = encode_residual_archive(
        certificate_id=cid,
        service_version=contents.meta["service_version"],
        request=contents.request,
        arrays=arrays,
    )
    engine = sa.create_engine(store.url)
    try:
        with engine.begin() as conn:
            conn.execute(
                sa.text(
                    "UPDATE residual_archives SET blob = :b, sha256 = :d WHERE certificate_id = :c"
                ),
                {"b": blob, "d": hashlib.sha256(blob).hexdigest(), "c": cid},
            )
    finally:
        engine.dispose()
    result = run("verify", cid)
    assert result.code == 1
    assert "DOES NOT MATCH" in result.out
    assert "bound.l2_space_time (changed)" in result.out
    assert "provenance.arrays_sha256.interior (changed)" in result.out


def test_usage_errors_exit_2(run: Runner) -> None:
    assert run("verify", "crt_x", "--rtol", "2").code == 2
    assert run("verify", "crt_x", "--rtol", "nan").code == 2
    bad_id = run("verify", "a/b")
    assert bad_id.code == 2 and "not a valid id" in bad_id.err


@pytest.mark.parametrize("status", [500, 503, 401])
def test_service_failures_exit_3(run_scripted: Any, status: int) -> None:
    seen: list[httpx.Request] = []

    def handler(request: httpx.Request) -> httpx.Response:
        seen.append(request)
        return httpx.Response(
            status,
            json={
                "type": "about:blank",
                "title": "x",
                "status": status,
                "detail": "down",
                "code": "internal_error",
            },
            headers={"content-type": "application/problem+json"},
        )

    result = run_scripted(handler, "verify", "crt_abc", "--json")
    assert result.code == 3
    assert result.json()["error"]["status"] == status
    assert seen[0].method == "POST" and seen[0].url.path == "/v1/certificates/crt_abc/verify"


def test_unreachable_exits_3(run_scripted: Any) -> None:
    def handler(request: httpx.Request) -> httpx.Response:
        raise httpx.ConnectError("connection refused", request=request)

    assert run_scripted(handler, "verify", "crt_abc").code == 3


def test_the_async_client_verifies_too(app: Any) -> None:
    cid = _archived(app, 3.5)

    async def go() -> Any:
        transport = httpx.ASGITransport(app=app)
        async with AsyncBoundsvcClient("http://boundsvc.test", transport=transport) as client:
            report = await client.verify(cid, rtol=0.0)
            info = await client.archive_info(cid)
            try:
                await client.archive_info("crt_" + "0" * 32)
            except BoundsvcClientError as exc:
                missing = exc.code
            return report, info, missing

    report, info, missing = asyncio.run(go())
    assert report.rtol == 0.0 and report.archive == info
    # exact comparison: a match, or only last-digit float differences (never anything else)
    assert report.matches or all(
        isinstance(d.stored, float) and isinstance(d.recomputed, float) for d in report.differences
    )
    assert missing == "certificate_not_found"


def test_verify_is_retried_like_a_get(run_scripted: Any) -> None:
    """Verify has no effect on the service, so a 503 is retried without an idempotency key."""
    from boundsvc.client import BoundsvcClient, RetryPolicy

    calls: list[httpx.Request] = []

    def handler(request: httpx.Request) -> httpx.Response:
        calls.append(request)
        return httpx.Response(503, json={"detail": "busy"}, headers={"Retry-After": "0"})

    client = BoundsvcClient(
        "http://svc.test",
        transport=httpx.MockTransport(handler),
        retries=RetryPolicy(max_retries=2),
        sleep=lambda _s: None,
    )
    with client, pytest.raises(BoundsvcClientError):
        client.verify("crt_abc")
    assert len(calls) == 3
    assert "idempotency-key" not in calls[0].headers
