"""SIGKILL during a burst of certificate POSTs loses nothing that was acknowledged.

A real ``python -m boundsvc.cli serve`` over a SQLite file takes certificate POSTs from three
threads; once some have been answered 201 and while others are in flight, the whole process
group is SIGKILLed (no shutdown handler runs).  The database file must then pass
``PRAGMA integrity_check``, and a restarted server must return every acknowledged
certificate byte for byte, list none twice, and report ready.  Unacknowledged requests
may or may not have been stored; both are correct.
"""

from __future__ import annotations

import random
import sqlite3
import threading
import time
from pathlib import Path

import httpx
import pytest

from tests.api.support import certificate_body, prepare
from tools.soak import ServeProcess, listed_ids

pytestmark = [pytest.mark.subprocess, pytest.mark.slow]

THREADS = 3
KILL_AFTER_ACKNOWLEDGED = 3


def _integrity(path: Path) -> list[str]:
    with sqlite3.connect(path) as conn:
        return [row[0] for row in conn.execute("PRAGMA integrity_check")]


def test_sigkill_mid_burst_keeps_every_acknowledged_certificate(tmp_path: Path) -> None:
    database = tmp_path / "crash.sqlite3"
    url = f"sqlite:///{database}"
    server = ServeProcess(url, log_path=tmp_path / "server.log").start()
    acknowledged: dict[str, bytes] = {}
    attempts = [0]
    lock = threading.Lock()
    stop = threading.Event()
    try:
        with httpx.Client(base_url=server.base_url, timeout=60) as setup:
            regularity, plan = prepare(setup)

        def post(thread: int) -> None:
            rng = random.Random(thread)
            with httpx.Client(base_url=server.base_url, timeout=60) as client:
                while not stop.is_set():
                    body = certificate_body(regularity, plan, rng)
                    with lock:
                        attempts[0] += 1
                    try:
                        response = client.post("/v1/certificates", json=body)
                    except httpx.TransportError:
                        return  # the server is gone
                    assert response.status_code == 201, response.text
                    with lock:
                        acknowledged[response.json()["id"]] = response.content

        threads = [threading.Thread(target=post, args=(t,)) for t in range(THREADS)]
        for thread in threads:
            thread.start()
        deadline = time.monotonic() + 120
        while len(acknowledged) < KILL_AFTER_ACKNOWLEDGED:
            assert time.monotonic() < deadline, server.log()
            assert all(t.is_alive() for t in threads), "a posting thread failed"
            time.sleep(0.01)
        server.kill()
        stop.set()
        for thread in threads:
            thread.join(timeout=60)
        assert server.proc is not None and server.proc.returncode == -9
    finally:
        stop.set()
        server.stop()

    in_flight = attempts[0] - len(acknowledged)
    assert in_flight >= 1, "the kill should have caught requests in flight"
    assert _integrity(database) == ["ok"]

    with (
        ServeProcess(url, log_path=tmp_path / "restart.log") as again,
        httpx.Client(base_url=again.base_url, timeout=60) as client,
    ):
        for cid, document in acknowledged.items():
            fetched = client.get(f"/v1/certificates/{cid}")
            assert fetched.status_code == 200, cid
            assert fetched.content == document, cid
        listed = listed_ids(client)
        assert set(acknowledged) <= set(listed)
        assert len(listed) == len(set(listed))
        assert len(listed) <= attempts[0]
        assert client.get("/v1/ready").status_code == 200
    assert _integrity(database) == ["ok"]
