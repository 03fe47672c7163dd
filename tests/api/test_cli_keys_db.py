"""``boundsvc keys ...`` and ``boundsvc db ...`` (in process), ``serve`` on a stale schema."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.engine import URL

from boundsvc.cli import main
from boundsvc.store import open_store
from tests.api.conftest import create_database, drop_database, pg_server_or_skip

REPO = Path(__file__).resolve().parents[2]


def run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_keys_create_list_revoke(sqlite_url: str, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(
        capsys,
        "keys",
        "create",
        "--project",
        "lab-a",
        "--name",
        "ci",
        "--scopes",
        "write,read",
        "--database-url",
        sqlite_url,
        "--json",
    )
    assert code == 0
    created = json.loads(out)
    assert created["scopes"] == ["read", "write"] and created["project"] == "lab-a"
    store = open_store(sqlite_url)
    try:
        record = store.verify_api_key(created["token"])
        assert record is not None and record.id == created["key_id"]
    finally:
        store.dispose()

    code, out, err = run(
        capsys,
        "keys",
        "create",
        "--project",
        "lab-b",
        "--name",
        "ops",
        "--database-url",
        sqlite_url,
    )
    assert code == 0 and "token: bsk_" in out and "shown only now" in err

    code, out, _ = run(
        capsys, "keys", "list", "--project", "lab-a", "--database-url", sqlite_url, "--json"
    )
    listed = json.loads(out)
    assert [k["key_id"] for k in listed] == [created["key_id"]]
    assert "token" not in listed[0]
    code, out, _ = run(capsys, "keys", "list", "--database-url", sqlite_url)
    assert "lab-a" in out and "lab-b" in out and "active" in out

    assert run(capsys, "keys", "revoke", created["key_id"], "--database-url", sqlite_url)[0] == 0
    code, _, err = run(capsys, "keys", "revoke", created["key_id"], "--database-url", sqlite_url)
    assert code == 1 and "no active key" in err
    code, out, _ = run(
        capsys, "keys", "list", "--project", "lab-a", "--database-url", sqlite_url, "--json"
    )
    assert json.loads(out)[0]["revoked_at"] is not None


def test_keys_reject_unknown_scopes(sqlite_url: str, capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit):
        main(
            [
                "keys",
                "create",
                "--project",
                "p",
                "--name",
                "n",
                "--scopes",
                "read,root",
                "--database-url",
                sqlite_url,
            ]
        )
    assert "subset of read,write,admin" in capsys.readouterr().err


def test_db_status_and_upgrade_on_sqlite(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    url = f"sqlite:///{tmp_path / 'fresh.sqlite3'}"
    code, out, _ = run(capsys, "db", "status", "--database-url", url, "--json")
    assert code == 1 and json.loads(out)["state"] == "missing"
    assert not (tmp_path / "fresh.sqlite3").exists()  # status never creates
    code, out, _ = run(capsys, "db", "upgrade", "--database-url", url)
    assert code == 0 and "upgraded from (empty) to revision" in out
    code, out, _ = run(capsys, "db", "upgrade", "--database-url", url)
    assert code == 0 and "nothing to do" in out
    code, out, _ = run(capsys, "db", "status", "--database-url", url)
    assert code == 0 and out.startswith("up_to_date")


@pytest.fixture
def empty_pg() -> Iterator[URL]:
    server = pg_server_or_skip()
    url = create_database(server, "boundsvc_clitest_")
    try:
        yield url
    finally:
        drop_database(server, url)


@pytest.mark.postgres
def test_db_status_and_upgrade_on_postgres(
    empty_pg: URL, capsys: pytest.CaptureFixture[str]
) -> None:
    url = empty_pg.render_as_string(hide_password=False)
    code, out, _ = run(capsys, "db", "status", "--database-url", url)
    assert code == 1 and f"boundsvc db upgrade --database-url {url}" in out
    code, _, err = run(capsys, "keys", "list", "--database-url", url)
    assert code == 2 and "boundsvc db upgrade --database-url" in err
    code, out, _ = run(capsys, "db", "upgrade", "--database-url", url, "--json")
    assert code == 0
    assert json.loads(out)["after"]["state"] == "up_to_date"
    assert run(capsys, "db", "status", "--database-url", url)[0] == 0


@pytest.mark.subprocess
def test_serve_refuses_a_stale_schema_and_prints_the_command(sqlite_url: str) -> None:
    open_store(sqlite_url).dispose()
    engine = create_engine(sqlite_url)
    with engine.begin() as conn:
        conn.execute(text("DELETE FROM alembic_version"))
    engine.dispose()
    env = {**os.environ, "OPENBLAS_NUM_THREADS": "1"}
    result = subprocess.run(
        [
            sys.executable,
            "-m",
            "boundsvc.cli",
            "serve",
            "--port",
            "0",
            "--database-url",
            sqlite_url,
        ],
        capture_output=True,
        text=True,
        timeout=60,
        cwd=REPO,
        env=env,
    )
    assert result.returncode == 2, result.stderr
    assert f"boundsvc db upgrade --database-url {sqlite_url}" in result.stderr
    assert "Traceback" not in result.stderr
