"""Residual archives and ``POST /v1/certificates/{id}/verify`` (issue 5, re-verification).

The archive must hold exactly the float64 arrays the bound was computed from, on every
transport; a recomputation from an untouched archive must give the stored certificate back;
any alteration of the archive or of the stored certificate must show up as a mismatch or a
clear 409, never as a 500 and never as a silent match.
"""

from __future__ import annotations

import base64
import hashlib
import io
import json
import random
import zipfile
from typing import Any

import numpy as np
import pytest
import sqlalchemy as sa

from boundsvc.api.routes import _verification
from boundsvc.api.routes._verification import compare_documents
from boundsvc.errors import ProblemNotCovered
from boundsvc.store import (
    ARCHIVE_CODEC,
    ArchiveCorrupt,
    Store,
    decode_residual_archive,
    encode_residual_archive,
)
from tests.api.conftest import ApiFactory, TestClient
from tests.api.support import certificate_body, prepare


def _post(
    client: TestClient,
    seed: int,
    headers: dict[str, str] | None = None,
    **extra: Any,
) -> dict[str, Any]:
    regularity, plan = prepare(client, headers)
    body = {**certificate_body(regularity, plan, random.Random(seed)), **extra}
    response = client.post("/v1/certificates", json=body, headers=headers)
    assert response.status_code == 201, response.text
    return dict(response.json())


def _verify(
    client: TestClient, cid: str, headers: dict[str, str] | None = None, **body: Any
) -> Any:
    return client.post(f"/v1/certificates/{cid}/verify", json=body or None, headers=headers)


def _sql(store: Store, statement: str, **params: Any) -> None:
    """Alter the database behind the service's back (what an intruder or a bad disk does)."""
    engine = sa.create_engine(store.url)
    try:
        with engine.begin() as conn:
            conn.execute(sa.text(statement), params)
    finally:
        engine.dispose()


def _problem(response: Any, status: int, code: str) -> dict[str, Any]:
    assert response.status_code == status, response.text
    assert response.headers["content-type"].startswith("application/problem+json")
    body = dict(response.json())
    assert body["code"] == code
    return body


# ----------------------------------------------------------------------------- archiving


def test_archiving_follows_the_setting_and_the_request_flag(api: ApiFactory) -> None:
    off = api(archive_residuals=False)
    plain = _post(off, seed=1)
    _problem(off.get(f"/v1/certificates/{plain['id']}/archive"), 404, "archive_not_found")
    flagged = _post(off, seed=2, archive=True)
    info = off.get(f"/v1/certificates/{flagged['id']}/archive")
    assert info.status_code == 200, info.text
    stored = api.store.get_archive(flagged["id"])
    assert stored is not None
    assert info.json()["codec"] == ARCHIVE_CODEC == stored.codec
    assert info.json()["size_bytes"] == len(stored.blob) > 0
    assert info.json()["sha256"] == hashlib.sha256(stored.blob).hexdigest()

    on = api(archive_residuals=True)
    default = _post(on, seed=3)
    assert on.get(f"/v1/certificates/{default['id']}/archive").status_code == 200
    refused = _post(on, seed=4, archive=False)
    assert api.store.archive_info(refused["id"]) is None


def test_the_archive_flag_is_not_part_of_the_certificate_id(api: ApiFactory) -> None:
    """Posting the same inputs again with ``archive: true`` adds the archive to the stored
    certificate (same id, same document); a third post keeps the one archive."""
    client = api()
    first = _post(client, seed=5)
    assert api.store.archive_info(first["id"]) is None
    again = _post(client, seed=5, archive=True)
    assert again == first
    info = api.store.archive_info(first["id"])
    assert info is not None
    third = _post(client, seed=5, archive=True)
    assert third == first
    assert api.store.archive_info(first["id"]) == info


def test_the_archive_holds_the_decoded_residuals_and_the_inputs(api: ApiFactory) -> None:
    client = api()
    regularity, plan = prepare(client)
    body = certificate_body(regularity, plan, random.Random(6))
    cert = client.post("/v1/certificates", json={**body, "archive": True}).json()
    archive = api.store.get_archive(cert["id"])
    assert archive is not None
    # numpy alone reads it (the format is an .npz), without pickles
    with np.load(io.BytesIO(archive.blob), allow_pickle=False) as npz:
        assert set(npz.files) == {"meta.json", *body["residuals"]}
        for name, values in body["residuals"].items():
            np.testing.assert_array_equal(npz[name], np.asarray(values, dtype=np.float64))
    contents = decode_residual_archive(archive.blob, archive.codec)
    request = contents.request
    assert request["plan_id"] == plan["plan_id"] == cert["provenance"]["plan_id"]
    assert request["problem_id"] == cert["problem_id"]
    assert request["regularity"] == regularity
    assert request["model"] == cert["model"]
    assert request["project"] == "default"
    for name, digest in cert["provenance"]["arrays_sha256"].items():
        assert contents.meta["arrays"][name]["sha256"] == digest


def _npz(request: dict[str, Any], arrays: dict[str, np.ndarray]) -> bytes:
    buf = io.BytesIO()
    np.savez(buf, request=np.frombuffer(json.dumps(request).encode(), dtype=np.uint8), **arrays)
    return buf.getvalue()


def test_every_transport_archives_and_verifies(api: ApiFactory) -> None:
    """JSON lists, base64, .npz (with a float32 interior) and octet-stream uploads."""
    client = api()
    regularity, plan = prepare(client)
    names = [c["name"] for c in plan["components"]]
    head = {"problem_id": None, "plan_id": plan["plan_id"], "regularity": regularity}
    head = {k: v for k, v in certificate_body(regularity, plan, random.Random(0)).items()}
    head.pop("residuals")
    head["archive"] = True
    rng = np.random.default_rng(7)

    def arrays() -> dict[str, np.ndarray]:
        return {c["name"]: rng.normal(scale=1e-3, size=c["size"]) for c in plan["components"]}

    as_json = client.post(
        "/v1/certificates", json={**head, "residuals": {k: v.tolist() for k, v in arrays().items()}}
    )
    b64 = {
        k: {"dtype": "float64", "encoding": "base64", "data": base64.b64encode(v).decode()}
        for k, v in arrays().items()
    }
    as_b64 = client.post("/v1/certificates", json={**head, "residuals": b64})
    single = arrays()
    single["interior"] = single["interior"].astype(np.float32)
    as_npz = client.post(
        "/v1/certificates/upload",
        content=_npz(head, single),
        headers={"content-type": "application/x-npz"},
    )
    octets = b"".join(arrays()[n].astype("<f8").tobytes() for n in names)
    header = base64.urlsafe_b64encode(json.dumps(head).encode()).decode().rstrip("=")
    as_octets = client.post(
        "/v1/certificates/upload",
        content=octets,
        headers={"content-type": "application/octet-stream", "x-boundsvc-request": header},
    )
    ids = set()
    for response in (as_json, as_b64, as_npz, as_octets):
        assert response.status_code == 201, response.text
        cid = response.json()["id"]
        ids.add(cid)
        report = _verify(client, cid)
        assert report.status_code == 200, report.text
        assert report.json()["matches"] is True, report.json()["differences"]
        assert report.json()["max_relative_difference"] <= 1e-12
    assert len(ids) == 4
    # the float32 interior was archived after its rounding inflation: the archive's values
    # are what the bound used, not the float32 values promoted
    archive = api.store.get_archive(as_npz.json()["id"])
    assert archive is not None
    kept = decode_residual_archive(archive.blob, archive.codec).arrays["interior"]
    promoted = single["interior"].astype(np.float64)
    assert np.all(np.abs(kept) >= np.abs(promoted)) and np.any(kept != promoted)


def test_archives_are_reproducible_bytes() -> None:
    arrays = {"interior": np.linspace(-1.0, 1.0, 50), "initial": np.zeros(7)}
    once = encode_residual_archive(
        certificate_id="crt_x", service_version="1", request={"a": 1}, arrays=arrays
    )
    twice = encode_residual_archive(
        certificate_id="crt_x", service_version="1", request={"a": 1}, arrays=dict(arrays)
    )
    assert once == twice


def test_unreadable_archives_raise_archive_corrupt() -> None:
    good = encode_residual_archive(
        certificate_id="crt_x", service_version="1", request={}, arrays={"interior": np.ones(4)}
    )
    with pytest.raises(ArchiveCorrupt, match="codec"):
        decode_residual_archive(good, "npz-bzip2/9")
    with pytest.raises(ArchiveCorrupt, match="cannot be read"):
        decode_residual_archive(b"not a zip file", ARCHIVE_CODEC)
    # an object array where a residual should be: refused, never unpickled
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        zf.writestr("meta.json", zipfile.ZipFile(io.BytesIO(good)).read("meta.json"))
        member = io.BytesIO()
        np.save(member, np.array([{"x": 1}], dtype=object), allow_pickle=True)
        zf.writestr("interior.npy", member.getvalue())
    with pytest.raises(ArchiveCorrupt, match="cannot be read"):
        decode_residual_archive(buf.getvalue(), ARCHIVE_CODEC)


# ----------------------------------------------------------------------------- verify


def test_an_untouched_archive_verifies_and_nothing_is_stored(any_api: ApiFactory) -> None:
    client = any_api()
    cert = _post(client, seed=8, archive=True)
    before = client.get("/v1/certificates").json()["items"]
    response = _verify(client, cert["id"])
    assert response.status_code == 200, response.text
    report = response.json()
    assert report["matches"] is True and report["rtol"] == 1e-12
    assert report["differences"] == [] and report["differences_total"] == 0
    # numpy's SIMD sums depend on the arrays' memory alignment, so the recomputation may
    # differ from the stored document in the last digit (then byte_identical is false)
    assert report["max_relative_difference"] <= 1e-12
    assert report["error"] is None
    assert report["stored_bound"] == cert["bound"]
    assert report["recomputed_bound"] == pytest.approx(cert["bound"], rel=1e-12)
    assert report["stored_status"] == report["recomputed_status"] == cert["status"]
    assert report["recomputed_id"] == cert["id"]
    assert report["stored_service_version"] == report["running_service_version"]
    assert "provenance.created_at" in report["ignored"] and "id" not in report["ignored"]
    assert report["archive"]["sha256"] == any_api.store.archive_info(cert["id"]).sha256
    assert client.get("/v1/certificates").json()["items"] == before
    assert client.get(f"/v1/certificates/{cert['id']}").json() == cert


def test_archive_bytes_altered_in_the_database_are_a_clear_409(any_api: ApiFactory) -> None:
    client = any_api()
    cert = _post(client, seed=9, archive=True)
    archive = any_api.store.get_archive(cert["id"])
    assert archive is not None
    flipped = bytearray(archive.blob)
    flipped[len(flipped) // 2] ^= 0xFF
    _sql(
        any_api.store,
        "UPDATE residual_archives SET blob = :blob WHERE certificate_id = :cid",
        blob=bytes(flipped),
        cid=cert["id"],
    )
    body = _problem(_verify(client, cert["id"]), 409, "archive_corrupt")
    assert "SHA-256" in body["detail"]


def test_consistently_rewritten_residuals_show_as_a_mismatch(any_api: ApiFactory) -> None:
    """Someone rewrote the archive (and its digest) with other residuals: the recomputed
    bound grows with them and the residual digests no longer match the certificate's."""
    client = any_api()
    cert = _post(client, seed=10, archive=True)
    archive = any_api.store.get_archive(cert["id"])
    assert archive is not None
    contents = decode_residual_archive(archive.blob, archive.codec)
    arrays = {**contents.arrays, "interior": 3.0 * contents.arrays["interior"]}
    blob = encode_residual_archive(
        certificate_id=cert["id"],
        service_version=contents.meta["service_version"],
        request=contents.request,
        arrays=arrays,
    )
    _sql(
        any_api.store,
        "UPDATE residual_archives SET blob = :blob, sha256 = :digest WHERE certificate_id = :cid",
        blob=blob,
        digest=hashlib.sha256(blob).hexdigest(),
        cid=cert["id"],
    )
    response = _verify(client, cert["id"])
    assert response.status_code == 200, response.text
    report = response.json()
    assert report["matches"] is False and report["byte_identical"] is False
    paths = {d["path"]: d for d in report["differences"]}
    assert "provenance.arrays_sha256.interior" in paths
    assert "provenance.arrays_sha256.initial" not in paths
    assert "id" in paths  # same version: the id hashes the residual digests
    l2 = paths["bound.l2_space_time"]
    assert (
        l2["kind"] == "changed"
        and l2["recomputed"] > l2["stored"] == cert["bound"]["l2_space_time"]
    )
    assert report["recomputed_bound"]["l2_space_time"] == l2["recomputed"]


def test_an_altered_stored_certificate_is_reported(any_api: ApiFactory) -> None:
    client = any_api()
    cert = _post(client, seed=11, archive=True)
    forged = json.loads(json.dumps(cert))
    forged["bound"]["l2_final_time"] = cert["bound"]["l2_final_time"] / 10
    forged["warnings"] = []
    forged["audited"] = True
    _sql(
        any_api.store,
        "UPDATE certificates SET document = :doc WHERE id = :cid",
        doc=json.dumps(forged).encode(),
        cid=cert["id"],
    )
    report = _verify(client, cert["id"]).json()
    assert report["matches"] is False
    paths = {d["path"]: d for d in report["differences"]}
    changed = paths["bound.l2_final_time"]
    assert changed["kind"] == "changed"
    assert changed["stored"] == forged["bound"]["l2_final_time"]
    assert changed["recomputed"] == pytest.approx(cert["bound"]["l2_final_time"], rel=1e-12)
    assert paths["audited"]["kind"] == "removed"
    if cert["warnings"]:
        assert paths["warnings[0]"]["kind"] == "added"
    assert report["stored_bound"] == forged["bound"]
    assert report["recomputed_bound"] == pytest.approx(cert["bound"], rel=1e-12)

    _sql(
        any_api.store,
        "UPDATE certificates SET document = :doc WHERE id = :cid",
        doc=b"\x00 not json",
        cid=cert["id"],
    )
    response = _verify(client, cert["id"])
    assert response.status_code == 200, response.text
    assert response.json()["matches"] is False
    assert response.json()["differences"][0]["path"] == "$"


def test_without_an_archive_verify_is_409_not_archived(api: ApiFactory) -> None:
    client = api(archive_residuals=False)
    cert = _post(client, seed=12)
    body = _problem(_verify(client, cert["id"]), 409, "not_archived")
    assert body["errors"][0]["field"] == "certificate_id"
    _problem(_verify(client, "crt_" + "0" * 32), 404, "certificate_not_found")


def test_projects_are_isolated_and_verify_needs_read(api: ApiFactory) -> None:
    """Verify stores nothing, so a read-only key (a registry gate's) may verify; a key
    without ``read`` may not (scopes do not imply each other)."""
    key_a = api.key("lab-a", "read", "write")
    key_b = api.key("lab-b", "read", "write")
    read_a = api.key("lab-a", "read")
    client = api()
    cert = _post(client, seed=13, headers=key_a, archive=True)
    assert _verify(client, cert["id"], key_a).json()["matches"] is True
    _problem(_verify(client, cert["id"], key_b), 404, "certificate_not_found")
    _problem(
        client.get(f"/v1/certificates/{cert['id']}/archive", headers=key_b),
        404,
        "certificate_not_found",
    )
    assert client.get(f"/v1/certificates/{cert['id']}/archive", headers=read_a).status_code == 200
    assert _verify(client, cert["id"], read_a).json()["matches"] is True
    write_only = api.key("lab-a", "write")
    _problem(_verify(client, cert["id"], write_only), 403, "forbidden")


def test_rtol_and_bad_bodies(api: ApiFactory) -> None:
    client = api()
    cert = _post(client, seed=14, archive=True)
    assert _verify(client, cert["id"], rtol=1e-9).json()["rtol"] == 1e-9
    _problem(_verify(client, cert["id"], rtol=-1), 422, "validation_error")
    _problem(_verify(client, cert["id"], tolerance=0.1), 422, "validation_error")


def test_a_refusal_of_the_running_version_is_a_mismatch_with_its_code(
    api: ApiFactory, monkeypatch: pytest.MonkeyPatch
) -> None:
    """E.g. a later version no longer covers the equation: the report says so (200)."""
    client = api()
    cert = _post(client, seed=15, archive=True)

    def refuse(problem: Any, budget_seconds: float | None = None) -> Any:
        raise ProblemNotCovered("no family covers this any more", {})

    monkeypatch.setattr(_verification, "derive", refuse)
    report = _verify(client, cert["id"]).json()
    assert report["matches"] is False
    assert report["error"]["code"] == "problem_not_covered"
    assert report["recomputed_bound"] is None and report["stored_bound"] == cert["bound"]


def test_another_running_version_ignores_the_fields_that_hash_the_version(
    api: ApiFactory, monkeypatch: pytest.MonkeyPatch
) -> None:
    client = api()
    cert = _post(client, seed=16, archive=True)
    import boundsvc.certify

    monkeypatch.setattr(boundsvc.certify, "__version__", "99.0.0")
    monkeypatch.setattr(_verification, "__version__", "99.0.0")
    report = _verify(client, cert["id"]).json()
    assert report["running_service_version"] == "99.0.0"
    assert report["stored_service_version"] == cert["provenance"]["service_version"]
    assert {"id", "provenance.inputs_sha256", "provenance.service_version"} <= set(
        report["ignored"]
    )
    assert report["recomputed_id"] != cert["id"]
    assert report["matches"] is True and report["byte_identical"] is False
    assert report["differences"] == []


# ----------------------------------------------------------------------------- compare


def test_compare_documents_paths_kinds_and_tolerance() -> None:
    stored = {"a": 1.0, "b": {"c": [1, 2, 3], "skip": {"x": 1}}, "d": True, "e": "x"}
    recomputed = {"a": 1.0 + 1e-12, "b": {"c": [1, 2], "skip": {"x": 2}}, "d": 1, "f": None}
    exact, worst = compare_documents(stored, recomputed, frozenset({"b.skip"}))
    assert [(d["path"], d["kind"]) for d in exact] == [
        ("a", "changed"),
        ("b.c[2]", "removed"),
        ("d", "changed"),
        ("e", "removed"),
        ("f", "added"),
    ]
    assert worst == pytest.approx(1e-12, rel=1e-3)
    loose, _ = compare_documents(stored, recomputed, frozenset({"b.skip"}), rtol=1e-9)
    assert "a" not in {d["path"] for d in loose}
    assert compare_documents({"n": 2}, {"n": 2.0}) == ([], 0.0)
    assert compare_documents([1], {"0": 1})[0][0]["path"] == "$"
    assert compare_documents({"x": 1e308}, {"x": -1e308})[1] == 2.0


def test_an_inline_plan_is_archived_and_verifies(api: ApiFactory) -> None:
    """A certificate on the client's own points: the archive keeps them (plan_spec)."""
    client = api()
    regularity, plan = prepare(client)
    inline = {
        c["name"]: {"axes": c["axes"], "points": c["points"], "weights": c["weights"]}
        for c in plan["components"]
    }
    rng = random.Random(17)
    residuals = {
        c["name"]: [rng.uniform(-1e-3, 1e-3) for _ in range(c["size"])] for c in plan["components"]
    }
    body = {"problem": certificate_body(regularity, plan, rng)["problem"], "plan": inline,
            "regularity": regularity, "residuals": residuals, "archive": True}  # fmt: skip
    cert = client.post("/v1/certificates", json=body)
    assert cert.status_code == 201, cert.text
    contents = decode_residual_archive(*_blob(api.store, cert.json()["id"]))
    assert contents.request["plan_spec"]["rule"] == "custom"
    report = _verify(client, cert.json()["id"]).json()
    assert report["matches"] is True, report["differences"]


def _blob(store: Store, cid: str) -> tuple[bytes, str]:
    archive = store.get_archive(cid)
    assert archive is not None
    return archive.blob, archive.codec
