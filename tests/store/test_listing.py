"""Keyset pagination, filters and counts of certificates."""

from __future__ import annotations

import base64
from datetime import UTC, datetime, timedelta

import pytest

from boundsvc.store import MAX_PAGE_SIZE, CertificateCount, InvalidCursor, Store

from .conftest import CertFactory

T0 = datetime(2024, 3, 1, tzinfo=UTC)


def _seed(put_cert: CertFactory, n: int = 120) -> list[str]:
    """Insert ``n`` certificates; every 3rd pair shares a timestamp (ties on created_at)."""
    ids = []
    for i in range(n):
        cid = f"cert-{i:04d}"
        put_cert(
            cid,
            project="alpha" if i % 4 else "beta",
            family="heat" if i % 2 else "wave",
            status="certified" if i % 3 else "failed",
            model_version=str(i % 5),
            created_at=T0 + timedelta(seconds=i // 2),
        )
        ids.append(cid)
    return ids


def _expected_order(store: Store) -> list[str]:
    """The newest-first order computed from independent single-row reads."""
    rows = [store.get_certificate(f"cert-{i:04d}", None) for i in range(120)]
    present = [r for r in rows if r is not None]
    return [r.id for r in sorted(present, key=lambda r: (r.created_at, r.id), reverse=True)]


def test_pages_cover_everything_once_newest_first(store: Store, put_cert: CertFactory) -> None:
    _seed(put_cert)
    seen: list[str] = []
    cursor = None
    pages = 0
    while True:
        page = store.list_certificates(None, limit=25, cursor=cursor)
        pages += 1
        assert len(page.items) <= 25
        seen.extend(c.id for c in page.items)
        if page.next_cursor is None:
            break
        assert set(page.next_cursor) <= set(
            "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_"
        )
        cursor = page.next_cursor
    assert pages == 5
    assert len(seen) == len(set(seen)) == 120
    assert seen == _expected_order(store)
    stamps = [(c.created_at, c.id) for c in store.list_certificates(None, limit=500).items]
    assert stamps == sorted(stamps, reverse=True)


def test_exact_multiple_has_no_empty_last_page(store: Store, put_cert: CertFactory) -> None:
    for i in range(50):
        put_cert(f"c{i:02d}")
    first = store.list_certificates(None, limit=25)
    second = store.list_certificates(None, limit=25, cursor=first.next_cursor)
    assert len(second.items) == 25
    assert second.next_cursor is None


def test_pagination_is_stable_under_concurrent_inserts(store: Store, put_cert: CertFactory) -> None:
    _seed(put_cert)
    expected = _expected_order(store)
    seen: list[str] = []
    cursor = None
    n = 0
    while True:
        page = store.list_certificates(None, limit=25, cursor=cursor)
        seen.extend(c.id for c in page.items)
        # Newer rows arrive between page fetches; they must not shift later pages.
        put_cert(f"late-{n}", created_at=datetime.now(UTC))
        n += 1
        if page.next_cursor is None:
            break
        cursor = page.next_cursor
    assert seen == expected


def test_filters(store: Store, put_cert: CertFactory) -> None:
    _seed(put_cert)

    def all_ids(**filters: object) -> list[str]:
        out: list[str] = []
        cursor = None
        while True:
            page = store.list_certificates(limit=7, cursor=cursor, **filters)  # type: ignore[arg-type]
            out.extend(c.id for c in page.items)
            if page.next_cursor is None:
                return out
            cursor = page.next_cursor

    def idx(cid: str) -> int:
        return int(cid.split("-")[1])

    alpha = all_ids(project="alpha")
    assert len(alpha) == 90 and all(idx(c) % 4 for c in alpha)
    heat_failed = all_ids(project=None, family="heat", status="failed")
    assert heat_failed and all(idx(c) % 2 == 1 and idx(c) % 3 == 0 for c in heat_failed)
    assert len(heat_failed) == len([i for i in range(120) if i % 2 == 1 and i % 3 == 0])
    v3 = all_ids(project=None, model_name="heat-mlp", model_version="3")
    assert sorted(v3) == sorted(f"cert-{i:04d}" for i in range(120) if i % 5 == 3)
    assert all_ids(project=None, model_name="other") == []
    window = all_ids(
        project=None,
        created_after=T0 + timedelta(seconds=10),
        created_before=T0 + timedelta(seconds=20),
    )
    assert sorted(window) == [f"cert-{i:04d}" for i in range(20, 40)]


def test_limit_is_clamped(store: Store, put_cert: CertFactory) -> None:
    for i in range(3):
        put_cert(f"c{i}")
    assert len(store.list_certificates(None, limit=0).items) == 1
    assert len(store.list_certificates(None, limit=-5).items) == 1
    page = store.list_certificates(None, limit=10_000)
    assert len(page.items) == 3 and page.next_cursor is None
    assert MAX_PAGE_SIZE == 500


@pytest.mark.parametrize(
    "cursor",
    [
        "",
        "not base64 !!",
        "@@@@",
        base64.urlsafe_b64encode(b"garbage").decode(),
        base64.urlsafe_b64encode(b"1|not-a-date|x").decode(),
        base64.urlsafe_b64encode(b"2|2024-01-01T00:00:00+00:00|x").decode(),
        base64.urlsafe_b64encode(b"1|2024-01-01T00:00:00|x").decode(),  # naive
        base64.urlsafe_b64encode(b"1|2024-01-01T00:00:00+00:00|").decode(),
        base64.urlsafe_b64encode(b"\xff\xfe|x|y").decode(),
        "A" * 5000,
    ],
)
def test_malformed_cursor(store: Store, cursor: str) -> None:
    with pytest.raises(InvalidCursor):
        store.list_certificates(None, cursor=cursor)


def test_counts(store: Store, put_cert: CertFactory) -> None:
    _seed(put_cert, 12)
    counts = store.count_certificates_by()
    assert sum(c.count for c in counts) == 12
    expected: dict[tuple[str, str], int] = {}
    for i in range(12):
        k = ("certified" if i % 3 else "failed", "heat" if i % 2 else "wave")
        expected[k] = expected.get(k, 0) + 1
    assert counts == [CertificateCount(s, f, n) for (s, f), n in sorted(expected.items())]
    beta = store.count_certificates_by("beta")
    assert sum(c.count for c in beta) == 3
    assert store.count_certificates_by("nobody") == []
    assert sum(c.count for c in store.count_certificates_by(model_name="heat-mlp")) == 12
