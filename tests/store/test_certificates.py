"""Certificates, problems, plans, residual archives and studies: storage semantics."""

from __future__ import annotations

import hashlib
from datetime import UTC, datetime, timedelta, timezone

import pytest
from sqlalchemy import text

from boundsvc.store import (
    ArchiveCorrupt,
    CertificateConflict,
    ContentConflict,
    Store,
    UnknownReference,
)

from .conftest import CertFactory

# Deliberately non-normalised JSON: odd whitespace, key order, escapes, non-ASCII, big
# numbers.  Whatever the caller's canonical form is, the store must return these bytes.
ODD_DOCUMENT = (
    '{"z":1,  "a":[1.0,2e-300,-0.0],"u":"\\u00e9 é ∂u/∂t","n":null,'
    '"big":123456789012345678901234567890}\n'
).encode()


def test_round_trip_is_byte_identical(store: Store, put_cert: CertFactory) -> None:
    stored = put_cert("c-odd", document=ODD_DOCUMENT, model_version=None)
    assert stored.document == ODD_DOCUMENT
    loaded = store.get_certificate("c-odd", None)
    assert loaded is not None
    assert loaded.document == ODD_DOCUMENT
    assert isinstance(loaded.document, bytes)
    assert loaded.model_version is None
    assert loaded.created_at.tzinfo is not None
    assert loaded.created_at.utcoffset() == timedelta(0)
    assert loaded == stored


def test_same_id_same_document_is_a_noop(store: Store, put_cert: CertFactory) -> None:
    first = put_cert("c1")
    again = put_cert("c1", status="ignored-metadata")
    assert again == first
    assert again.status == "certified"  # metadata of the first insert wins
    assert [c.id for c in store.list_certificates(None).items] == ["c1"]


def test_same_id_different_document_conflicts(store: Store, put_cert: CertFactory) -> None:
    put_cert("c1")
    with pytest.raises(CertificateConflict) as info:
        put_cert("c1", document=b'{"id":"c1","bound":2}')
    assert isinstance(info.value, ContentConflict)
    assert info.value.row_id == "c1"
    loaded = store.get_certificate("c1", None)
    assert loaded is not None
    assert loaded.document == b'{"id":"c1","bound":1.5e-3}'


def test_document_must_be_json_bytes(put_cert: CertFactory) -> None:
    with pytest.raises(TypeError):
        put_cert("c1", document='{"a": 1}')
    with pytest.raises(ValueError, match="not UTF-8 JSON"):
        put_cert("c1", document=b"{not json")


def test_naive_created_at_is_rejected(put_cert: CertFactory) -> None:
    with pytest.raises(ValueError, match="timezone-aware"):
        put_cert("c1", created_at=datetime(2024, 1, 1))


def test_created_at_is_normalised_to_utc(store: Store, put_cert: CertFactory) -> None:
    plus2 = datetime(2024, 5, 1, 14, 0, 0, 123456, tzinfo=timezone(timedelta(hours=2)))
    put_cert("c1", created_at=plus2)
    loaded = store.get_certificate("c1", None)
    assert loaded is not None
    assert loaded.created_at == datetime(2024, 5, 1, 12, 0, 0, 123456, tzinfo=UTC)
    assert loaded.created_at.tzinfo == UTC


def test_project_isolation(store: Store, put_cert: CertFactory) -> None:
    put_cert("ca", project="alpha")
    put_cert("cb", project="beta")
    assert store.get_certificate("ca", "alpha") is not None
    assert store.get_certificate("ca", "beta") is None
    assert store.get_certificate("ca", None) is not None
    assert store.get_certificate("missing", None) is None
    assert [c.id for c in store.list_certificates("alpha").items] == ["ca"]
    assert [c.id for c in store.list_certificates("beta").items] == ["cb"]
    assert {c.id for c in store.list_certificates(None).items} == {"ca", "cb"}


def test_problem_and_plan_references(store: Store, put_cert: CertFactory) -> None:
    problem = store.put_problem("p1", {"pde": "heat", "L": 1.0, "bc": ("d", "d")}, "heat")
    assert problem.body == {"pde": "heat", "L": 1.0, "bc": ["d", "d"]}
    assert store.put_problem("p1", {"pde": "heat", "L": 1.0, "bc": ["d", "d"]}, "heat") == problem
    with pytest.raises(ContentConflict):
        store.put_problem("p1", {"pde": "wave"}, "heat")
    plan = store.put_plan("plan1", {"n": 64}, problem_id="p1")
    assert store.get_plan("plan1") == plan
    assert store.get_problem("p1") == problem
    assert store.get_problem("nope") is None and store.get_plan("nope") is None
    with pytest.raises(UnknownReference):
        store.put_plan("plan2", {"n": 1}, problem_id="no-such-problem")
    cert = put_cert("c1", problem_id="p1", plan_id="plan1")
    assert (cert.problem_id, cert.plan_id) == ("p1", "plan1")
    with pytest.raises(UnknownReference):
        put_cert("c2", plan_id="no-such-plan")
    assert store.get_certificate("c2", None) is None


def test_json_values_are_validated(store: Store) -> None:
    with pytest.raises(ValueError, match="JSON"):
        store.put_problem("p1", {"x": float("nan")}, "heat")
    with pytest.raises(ValueError, match="JSON"):
        store.put_study("s1", "proj", {"x": object()})


def test_residual_archive_round_trip(store: Store, put_cert: CertFactory) -> None:
    put_cert("c1", project="alpha")
    blob = bytes(range(256)) * 1000
    archive = store.put_archive("c1", blob, "zstd")
    assert archive.sha256 == hashlib.sha256(blob).hexdigest()
    assert store.put_archive("c1", blob, "zstd") == archive
    with pytest.raises(ContentConflict):
        store.put_archive("c1", blob + b"x", "zstd")
    loaded = store.get_archive("c1")
    assert loaded is not None and loaded.blob == blob and loaded.codec == "zstd"
    assert store.get_archive("c1", "alpha") == loaded
    assert store.get_archive("c1", "beta") is None
    assert store.get_archive("c2") is None
    with pytest.raises(UnknownReference):
        store.put_archive("no-such-certificate", b"x", "raw")


def test_corrupt_archive_is_detected(store: Store, put_cert: CertFactory) -> None:
    put_cert("c1")
    store.put_archive("c1", b"residuals", "raw")
    with store._engines.write.begin() as conn:
        conn.execute(text("UPDATE residual_archives SET blob = :b"), {"b": b"tampered"})
    with pytest.raises(ArchiveCorrupt):
        store.get_archive("c1")


def test_studies(store: Store) -> None:
    t0 = datetime(2024, 1, 1, tzinfo=UTC)
    s1 = store.put_study("s1", "alpha", {"title": "one"}, created_at=t0)
    s2 = store.put_study("s2", "alpha", {"title": "two"}, created_at=t0 + timedelta(seconds=1))
    store.put_study("s3", "beta", {"title": "three"})
    assert store.put_study("s1", "alpha", {"title": "one"}) == s1
    with pytest.raises(ContentConflict):
        store.put_study("s1", "alpha", {"title": "changed"})
    assert store.get_study("s1") == s1
    assert store.get_study("s1", "alpha") == s1
    assert store.get_study("s1", "beta") is None
    assert store.list_studies("alpha") == [s2, s1]
    assert len(store.list_studies(None)) == 3
    assert store.list_studies("alpha", limit=0) == [s2]


def test_length_limits_are_enforced_on_every_backend(store: Store, put_cert: CertFactory) -> None:
    with pytest.raises(ValueError, match=r"certificates\.project exceeds 128"):
        put_cert("c1", project="p" * 129)
    with pytest.raises(ValueError, match=r"idempotency_keys\.key exceeds 256"):
        store.begin_idempotent("p", "k" * 257, "a" * 64)
    assert store.get_certificate("c1", None) is None
