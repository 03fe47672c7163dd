"""API keys: creation, verification, revocation, hashing."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from sqlalchemy import bindparam, text

from boundsvc.store import Store
from boundsvc.store._schema import UTCDateTime


def test_create_and_verify(store: Store) -> None:
    key_id, token = store.create_api_key("alpha", "ci", ["write", "read"])
    assert token.startswith(f"bsk_{key_id}_")
    assert len(token) > 40
    record = store.verify_api_key(token)
    assert record is not None
    assert (record.id, record.project, record.name) == (key_id, "alpha", "ci")
    assert record.scopes == ("read", "write")
    assert record.created_at.tzinfo == UTC
    assert record.last_used_at is not None and not record.revoked


def test_only_a_salted_hash_is_stored(store: Store) -> None:
    _, token1 = store.create_api_key("alpha", "a", ["read"])
    _, token2 = store.create_api_key("alpha", "b", ["read"])
    secret1 = token1.split("_", 2)[2]
    with store._engines.read.connect() as conn:
        rows = conn.execute(text("SELECT id, secret_hash FROM api_keys")).all()
    dump = repr(rows)
    assert secret1 not in dump and token1 not in dump and token2.split("_", 2)[2] not in dump
    salts = {h.split("$")[1] for _, h in rows}
    assert len(salts) == 2
    assert all(h.startswith("sha256$") for _, h in rows)


@pytest.mark.parametrize(
    "mutate",
    [
        lambda t: t[:-1] + ("A" if t[-1] != "A" else "B"),  # wrong secret
        lambda t: t.replace("bsk_", "xyz_", 1),
        lambda t: "bsk_0000000000000000_" + t.split("_", 2)[2],  # unknown id
        lambda t: t.split("_", 2)[0] + "_" + t.split("_", 2)[1],  # no secret
        lambda t: "",
        lambda t: t + "\x00",
        lambda t: t.upper(),
    ],
)
def test_wrong_tokens_are_rejected(store: Store, mutate: object) -> None:
    _, token = store.create_api_key("alpha", "a", ["read"])
    assert callable(mutate)
    assert store.verify_api_key(mutate(token)) is None
    assert store.verify_api_key(token) is not None


def test_revoke(store: Store) -> None:
    key_id, token = store.create_api_key("alpha", "a", ["admin"])
    other_id, other = store.create_api_key("alpha", "b", ["read"])
    assert store.revoke_api_key(key_id) is True
    assert store.revoke_api_key(key_id) is False
    assert store.revoke_api_key("nope") is False
    assert store.verify_api_key(token) is None
    assert store.verify_api_key(other) is not None
    listed = {k.id: k for k in store.list_api_keys("alpha")}
    assert listed[key_id].revoked and not listed[other_id].revoked


def test_list_by_project(store: Store) -> None:
    a, _ = store.create_api_key("alpha", "a", ["read"])
    b, _ = store.create_api_key("beta", "b", ["read"])
    assert [k.id for k in store.list_api_keys("alpha")] == [a]
    assert {k.id for k in store.list_api_keys()} == {a, b}
    assert store.list_api_keys("gamma") == []


@pytest.mark.parametrize("scopes", [[], ["root"], "read", ["read", "superuser"]])
def test_invalid_scopes(store: Store, scopes: list[str]) -> None:
    with pytest.raises(ValueError, match="scopes"):
        store.create_api_key("alpha", "a", scopes)  # type: ignore[arg-type]


def test_last_used_is_throttled(store: Store) -> None:
    _, token = store.create_api_key("alpha", "a", ["read"])
    first = store.verify_api_key(token)
    second = store.verify_api_key(token)
    assert first is not None and second is not None
    assert first.last_used_at == second.last_used_at
    old = datetime.now(UTC) - timedelta(hours=1)
    with store._engines.write.begin() as conn:
        conn.execute(
            text("UPDATE api_keys SET last_used_at = :t").bindparams(
                bindparam("t", type_=UTCDateTime())
            ),
            {"t": old},
        )
    third = store.verify_api_key(token)
    assert third is not None and third.last_used_at is not None
    assert third.last_used_at > old + timedelta(minutes=59)
