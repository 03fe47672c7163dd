"""Operations around re-verification (issue 5): ``boundsvc db purge-idempotency``,
``boundsvc db purge-archives``, and the metrics directory ``boundsvc serve`` prepares."""

from __future__ import annotations

import datetime as dt
import json
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import sqlalchemy as sa

import boundsvc.api.metrics
from boundsvc.cli import main, serve
from boundsvc.settings import get_settings
from boundsvc.store import (
    ARCHIVE_CODEC,
    Replay,
    Started,
    Store,
    encode_residual_archive,
    open_store,
)


@pytest.fixture
def db(tmp_path: Path) -> Iterator[tuple[str, Store]]:
    url = f"sqlite:///{tmp_path / 'ops.sqlite3'}"
    store = open_store(url)
    try:
        yield url, store
    finally:
        store.dispose()


def _age(store: Store, table: str, column: str, days: float, where: str, **params: Any) -> None:
    """Move a row's timestamp ``days`` into the past (the store has no API for that)."""
    engine = sa.create_engine(store.url)
    then = dt.datetime.now(dt.UTC) - dt.timedelta(days=days)
    try:
        with engine.begin() as conn:
            conn.execute(
                sa.text(f"UPDATE {table} SET {column} = :then WHERE {where}"),
                {"then": then, **params},
            )
    finally:
        engine.dispose()


def _finished_key(store: Store, key: str) -> None:
    assert isinstance(store.begin_idempotent("lab", key, "sha-" + key), Started)
    assert store.finish_idempotent("lab", key, 201, b"{}")


def test_purge_idempotency_removes_old_keys_and_keeps_new_ones(
    db: tuple[str, Store], capsys: pytest.CaptureFixture[str]
) -> None:
    url, store = db
    _finished_key(store, "old")
    _finished_key(store, "new")
    _age(store, "idempotency_keys", "updated_at", 8, "key = :k", k="old")
    assert main(["db", "purge-idempotency", "--older-than", "7d", "--database-url", url]) == 0
    assert "deleted 1 idempotency keys" in capsys.readouterr().out
    # the old key is free again (a new request runs); the new one still replays
    assert isinstance(store.begin_idempotent("lab", "old", "sha-old"), Started)
    assert isinstance(store.begin_idempotent("lab", "new", "sha-new"), Replay)
    again = ["db", "purge-idempotency", "--older-than", "7d", "--database-url", url, "--json"]
    assert main(again) == 0
    assert json.loads(capsys.readouterr().out)["deleted"] == 0


def test_purge_idempotency_refuses_bad_or_too_short_durations(
    db: tuple[str, Store], capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    url, store = db
    _finished_key(store, "k")
    _age(store, "idempotency_keys", "updated_at", 1 / 24, "key = :k", k="k")  # an hour ago
    base = ["db", "purge-idempotency", "--database-url", url, "--older-than"]
    assert main([*base, "seven days"]) == 2
    assert "expected a duration" in capsys.readouterr().err
    monkeypatch.setenv("BOUNDSVC_IDEMPOTENCY_STALE_SECONDS", "7200")
    assert main([*base, "30m"]) == 2  # shorter than the stale limit: a claim may still run
    assert "BOUNDSVC_IDEMPOTENCY_STALE_SECONDS" in capsys.readouterr().err
    assert isinstance(store.begin_idempotent("lab", "k", "sha-k"), Replay)  # nothing deleted
    missing = f"sqlite:///{Path(store.url.database or '').parent / 'absent.sqlite3'}"
    assert main(["db", "purge-idempotency", "--database-url", missing, "--older-than", "7d"]) == 2


def test_purge_archives_keeps_certificates_and_recent_archives(
    db: tuple[str, Store], capsys: pytest.CaptureFixture[str]
) -> None:
    url, store = db
    for cid in ("crt_old", "crt_new"):
        store.put_certificate(
            id=cid, project="lab", model_name="m", model_version=None, family="f",
            status="valid", document=b"{}",
        )  # fmt: skip
        blob = encode_residual_archive(
            certificate_id=cid, service_version="0", request={}, arrays={"interior": np.ones(3)}
        )
        store.put_archive(cid, blob, ARCHIVE_CODEC)
    _age(store, "residual_archives", "created_at", 400, "certificate_id = :c", c="crt_old")
    assert main(["db", "purge-archives", "--older-than", "365d", "--database-url", url]) == 0
    assert "deleted 1 residual archives" in capsys.readouterr().out
    assert store.archive_info("crt_old") is None
    assert store.archive_info("crt_new") is not None
    assert store.get_certificate("crt_old", None) is not None


# ----------------------------------------------------------------------------- serve


@pytest.fixture
def fake_uvicorn(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> Iterator[dict[str, Any]]:
    """``boundsvc serve`` up to the point where uvicorn would start: records what the
    workers would inherit. The environment and cached settings are restored afterwards."""
    import uvicorn

    seen: dict[str, Any] = {}

    def run(*args: Any, **kwargs: Any) -> None:
        directory = os.environ.get(serve.MULTIPROC_ENV)
        seen["dir"] = directory
        seen["files"] = sorted(p.name for p in Path(directory).iterdir()) if directory else None
        seen["workers"] = kwargs["workers"]

    monkeypatch.setattr(uvicorn, "run", run)
    seen["db"] = f"sqlite:///{tmp_path / 'serve.sqlite3'}"
    for name, value in (
        ("BOUNDSVC_HOST", "127.0.0.1"),
        ("BOUNDSVC_PORT", "8000"),
        ("BOUNDSVC_DATABASE_URL", seen["db"]),
        ("OPENBLAS_NUM_THREADS", "1"),
    ):  # serve sets these for its workers: monkeypatch puts the old values back
        monkeypatch.setenv(name, value)
    # set, then delete: monkeypatch records the variable either way and removes what serve
    # (or a test) puts there, which would switch later apps' metrics to multiprocess mode
    monkeypatch.setenv(serve.MULTIPROC_ENV, "unset")
    monkeypatch.delenv(serve.MULTIPROC_ENV)
    yield seen
    get_settings.cache_clear()


@pytest.fixture(autouse=True)
def _no_leak() -> Iterator[None]:
    before = os.environ.get(serve.MULTIPROC_ENV)
    yield
    assert os.environ.get(serve.MULTIPROC_ENV) == before, "the metrics variable leaked"


def test_serve_creates_and_cleans_the_metrics_dir(
    fake_uvicorn: dict[str, Any], tmp_path: Path
) -> None:
    metrics = tmp_path / "run" / "metrics"
    metrics.mkdir(parents=True)
    (metrics / "counter_4242.db").write_bytes(b"stale")
    (metrics / "histogram_4242.db").write_bytes(b"stale")
    (metrics / "README").write_text("not ours: kept")
    argv = ["serve", "--workers", "2", "--database-url", fake_uvicorn["db"]]
    assert main([*argv, "--metrics-dir", str(metrics)]) == 0
    assert fake_uvicorn["dir"] == str(metrics)
    assert fake_uvicorn["files"] == ["README"]
    assert fake_uvicorn["workers"] == 2

    fresh = tmp_path / "not" / "yet"
    os.environ[serve.MULTIPROC_ENV] = str(fresh)  # the variable alone also works
    assert main(argv) == 0
    assert fake_uvicorn["dir"] == str(fresh) and fake_uvicorn["files"] == []
    assert fresh.is_dir()  # a configured directory outlives the service


def test_several_workers_without_a_dir_get_a_temporary_one(
    fake_uvicorn: dict[str, Any],
) -> None:
    assert main(["serve", "--workers", "3", "--database-url", fake_uvicorn["db"]]) == 0
    temporary = fake_uvicorn["dir"]
    assert temporary and fake_uvicorn["files"] == []
    assert not Path(temporary).exists()  # removed when the service stopped
    assert main(["serve", "--workers", "1", "--database-url", fake_uvicorn["db"]]) == 0
    assert fake_uvicorn["dir"] is None  # one process: metrics stay in memory


def test_serve_refuses_a_metrics_path_that_is_a_file(
    fake_uvicorn: dict[str, Any], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    afile = tmp_path / "metrics"
    afile.write_text("x")
    argv = ["serve", "--workers", "2", "--metrics-dir", str(afile)]
    assert main([*argv, "--database-url", fake_uvicorn["db"]]) == 2
    assert "not a directory" in capsys.readouterr().err
    assert "dir" not in fake_uvicorn


def test_the_variable_is_the_one_the_metrics_module_reads() -> None:
    assert serve.MULTIPROC_ENV == boundsvc.api.metrics.MULTIPROC_ENV
