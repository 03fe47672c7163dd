"""Idempotency keys: outcomes, finishing, abandoning, stale take-over, concurrency."""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor
from datetime import UTC, datetime, timedelta

from sqlalchemy import bindparam, text

from boundsvc.store import InProgress, Mismatch, Replay, Started, Store
from boundsvc.store._schema import UTCDateTime

H1 = "a" * 64
H2 = "b" * 64


def test_outcomes(store: Store) -> None:
    assert store.begin_idempotent("p", "k1", H1) == Started()
    assert store.begin_idempotent("p", "k1", H1) == InProgress()
    assert store.begin_idempotent("p", "k1", H2) == Mismatch()
    assert store.finish_idempotent("p", "k1", 201, b'{"id":"c1"}') is True
    assert store.begin_idempotent("p", "k1", H1) == Replay(201, b'{"id":"c1"}')
    assert store.begin_idempotent("p", "k1", H2) == Mismatch()
    # Finishing twice or abandoning a finished key does nothing.
    assert store.finish_idempotent("p", "k1", 500, b"") is False
    assert store.abandon_idempotent("p", "k1") is False
    assert store.begin_idempotent("p", "k1", H1) == Replay(201, b'{"id":"c1"}')


def test_keys_are_scoped_by_project(store: Store) -> None:
    assert store.begin_idempotent("p", "k", H1) == Started()
    assert store.begin_idempotent("q", "k", H2) == Started()
    assert store.finish_idempotent("q", "k", 200, b"q")
    assert store.begin_idempotent("p", "k", H1) == InProgress()


def test_abandon_allows_retry(store: Store) -> None:
    assert store.begin_idempotent("p", "k", H1) == Started()
    assert store.abandon_idempotent("p", "k") is True
    assert store.abandon_idempotent("p", "k") is False
    assert store.begin_idempotent("p", "k", H2) == Started()
    assert store.finish_idempotent("p", "k", 204, b"")
    assert store.begin_idempotent("p", "k", H2) == Replay(204, b"")
    assert store.finish_idempotent("p", "unknown", 200, b"") is False


def test_stale_running_key_is_taken_over_once(store: Store) -> None:
    assert store.begin_idempotent("p", "k", H1) == Started()
    old = datetime.now(UTC) - timedelta(hours=1)
    with store._engines.write.begin() as conn:
        conn.execute(
            text("UPDATE idempotency_keys SET updated_at = :t").bindparams(
                bindparam("t", type_=UTCDateTime())
            ),
            {"t": old},
        )
    assert store.begin_idempotent("p", "k", H1) == InProgress()
    stale = timedelta(minutes=10)
    assert store.begin_idempotent("p", "k", H1, stale_after=stale) == Started()
    assert store.begin_idempotent("p", "k", H1, stale_after=stale) == InProgress()
    assert store.begin_idempotent("p", "k", H2, stale_after=stale) == Mismatch()


def test_purge(store: Store) -> None:
    store.begin_idempotent("p", "old", H1)
    store.begin_idempotent("p", "new", H1)
    old = datetime.now(UTC) - timedelta(days=2)
    with store._engines.write.begin() as conn:
        conn.execute(
            text("UPDATE idempotency_keys SET updated_at = :t WHERE key = 'old'").bindparams(
                bindparam("t", type_=UTCDateTime())
            ),
            {"t": old},
        )
    assert store.purge_idempotency_keys(datetime.now(UTC) - timedelta(days=1)) == 1
    assert store.begin_idempotent("p", "old", H2) == Started()
    assert store.begin_idempotent("p", "new", H2) == Mismatch()


def test_concurrent_begin_has_exactly_one_winner(store: Store) -> None:
    for round_ in range(3):
        key = f"race-{round_}"
        barrier = threading.Barrier(8)

        def attempt(key: str = key, barrier: threading.Barrier = barrier) -> object:
            barrier.wait(timeout=30)
            return store.begin_idempotent("p", key, H1)

        with ThreadPoolExecutor(max_workers=8) as pool:
            outcomes = [f.result(timeout=60) for f in [pool.submit(attempt) for _ in range(8)]]
        assert outcomes.count(Started()) == 1, outcomes
        assert outcomes.count(InProgress()) == 7, outcomes


def test_concurrent_begin_after_finish_all_replay(store: Store) -> None:
    assert store.begin_idempotent("p", "k", H1) == Started()
    store.finish_idempotent("p", "k", 201, b"body")
    barrier = threading.Barrier(8)

    def attempt() -> object:
        barrier.wait(timeout=30)
        return store.begin_idempotent("p", "k", H1)

    with ThreadPoolExecutor(max_workers=8) as pool:
        outcomes = [f.result(timeout=60) for f in [pool.submit(attempt) for _ in range(8)]]
    assert outcomes == [Replay(201, b"body")] * 8
