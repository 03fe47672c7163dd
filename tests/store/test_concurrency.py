"""Concurrent writers: no lost, duplicated or half-written rows on either backend."""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

from boundsvc.store import CertificateConflict, Store, StoredCertificate

from .conftest import CertFactory

THREADS = 16
PER_THREAD = 25


def test_parallel_inserts_lose_nothing(store: Store, put_cert: CertFactory) -> None:
    barrier = threading.Barrier(THREADS)

    def worker(t: int) -> list[str]:
        barrier.wait(timeout=30)
        ids = []
        for i in range(PER_THREAD):
            cid = f"t{t:02d}-{i:02d}"
            put_cert(cid, project=f"proj-{t % 4}", status="certified" if i % 2 else "failed")
            ids.append(cid)
        return ids

    with ThreadPoolExecutor(max_workers=THREADS) as pool:
        written = [
            cid
            for f in [pool.submit(worker, t) for t in range(THREADS)]
            for cid in f.result(timeout=300)
        ]
    assert len(written) == THREADS * PER_THREAD

    listed: list[str] = []
    cursor = None
    while True:
        page = store.list_certificates(None, limit=97, cursor=cursor)
        listed.extend(c.id for c in page.items)
        if page.next_cursor is None:
            break
        cursor = page.next_cursor
    assert sorted(listed) == sorted(written)
    assert len(set(listed)) == len(listed)
    assert sum(c.count for c in store.count_certificates_by()) == THREADS * PER_THREAD
    for cid in written[::37]:
        loaded = store.get_certificate(cid, None)
        assert loaded is not None
        assert loaded.document == f'{{"id":"{cid}","bound":1.5e-3}}'.encode()


def test_racing_identical_inserts_all_succeed(store: Store, put_cert: CertFactory) -> None:
    barrier = threading.Barrier(8)

    def worker() -> StoredCertificate:
        barrier.wait(timeout=30)
        return put_cert("same")

    with ThreadPoolExecutor(max_workers=8) as pool:
        results = [f.result(timeout=60) for f in [pool.submit(worker) for _ in range(8)]]
    assert len({r.created_at for r in results}) == 1
    assert len(store.list_certificates(None).items) == 1


def test_racing_conflicting_inserts_have_one_winner(store: Store, put_cert: CertFactory) -> None:
    barrier = threading.Barrier(8)

    def worker(n: int) -> str:
        barrier.wait(timeout=30)
        try:
            put_cert("contested", document=f'{{"writer":{n}}}'.encode())
        except CertificateConflict:
            return "conflict"
        return f"won-{n}"

    with ThreadPoolExecutor(max_workers=8) as pool:
        outcomes = [f.result(timeout=60) for f in [pool.submit(worker, n) for n in range(8)]]
    winners = [o for o in outcomes if o.startswith("won")]
    assert len(winners) == 1 and outcomes.count("conflict") == 7
    stored = store.get_certificate("contested", None)
    assert stored is not None
    assert stored.document == f'{{"writer":{winners[0].split("-")[1]}}}'.encode()
