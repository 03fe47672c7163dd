"""Two ``boundsvc serve`` processes sharing one PostgreSQL database.

Concurrent clients spread certificate POSTs (with ``Idempotency-Key`` and retries, some of
them racing each other on the other process) over both.  Every acknowledged certificate
must be readable from both processes, a retried key must always get the same document,
and no certificate may be stored twice.  Both processes share a
``PROMETHEUS_MULTIPROC_DIR``, so either one's ``/metrics`` counts the requests of both.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import random
import re
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

import httpx
import pytest
from sqlalchemy.engine import URL

from boundsvc.cli import main
from tests.api.conftest import create_database, drop_database, pg_server_or_skip
from tests.api.support import certificate_body, prepare

pytestmark = [pytest.mark.subprocess, pytest.mark.postgres, pytest.mark.slow]

REPO = Path(__file__).resolve().parents[2]
N_REQUESTS = 16
N_CLIENTS = 4


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def _cli(*argv: str) -> tuple[int, str]:
    """Run a ``boundsvc`` command in this process (saves a cold start per command)."""
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        code = main(list(argv))
    return code, out.getvalue()


@pytest.fixture
def database() -> Iterator[str]:
    server = pg_server_or_skip()
    url: URL = create_database(server, "boundsvc_scale_")
    try:
        yield url.render_as_string(hide_password=False)
    finally:
        drop_database(server, url)


@pytest.fixture
def servers(database: str, tmp_path: Path) -> Iterator[tuple[list[str], str]]:
    """Two serve processes on free loopback ports, and an API key valid on both."""
    metrics_dir = tmp_path / "metrics"
    metrics_dir.mkdir()
    env = {
        **os.environ,
        "OPENBLAS_NUM_THREADS": "1",
        "BOUNDSVC_LOG_LEVEL": "warning",
        "PROMETHEUS_MULTIPROC_DIR": str(metrics_dir),
    }
    env.pop("BOUNDSVC_DATABASE_URL", None)
    assert _cli("db", "upgrade", "--database-url", database)[0] == 0
    code, created = _cli(
        "keys",
        "create",
        "--project",
        "scale",
        "--name",
        "load",
        "--scopes",
        "read,write,admin",
        "--database-url",
        database,
        "--json",
    )
    assert code == 0
    token = json.loads(created)["token"]
    procs: list[subprocess.Popen[bytes]] = []
    urls: list[str] = []
    try:
        for i in range(2):
            port = _free_port()
            with (tmp_path / f"server{i}.log").open("wb") as log:  # the child keeps its copy
                procs.append(
                    subprocess.Popen(
                        [
                            sys.executable,
                            "-m",
                            "boundsvc.cli",
                            "serve",
                            "--host",
                            "127.0.0.1",
                            "--port",
                            str(port),
                            "--database-url",
                            database,
                            "--workers",
                            "1",
                        ],
                        cwd=REPO,
                        env=env,
                        stdout=log,
                        stderr=subprocess.STDOUT,
                    )
                )
            urls.append(f"http://127.0.0.1:{port}")
        deadline = time.monotonic() + 60  # generous: a loaded CI machine imports slowly
        for url, proc in zip(urls, procs, strict=True):
            while True:
                assert proc.poll() is None, (tmp_path / "server0.log").read_text()
                try:
                    if httpx.get(f"{url}/v1/health", timeout=1).status_code == 200:
                        break
                except httpx.TransportError:
                    pass
                assert time.monotonic() < deadline, "server did not start in 60 s"
                time.sleep(0.1)
        yield urls, token
    finally:
        for proc in procs:
            proc.terminate()
        for proc in procs:
            try:
                proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()


def _post_until_acknowledged(
    client: httpx.Client, base: str, body: dict[str, Any], key: str, headers: dict[str, str]
) -> list[httpx.Response]:
    """Retry (409 in progress, 5xx, transport errors) until a 201; return the 201s."""
    acknowledged: list[httpx.Response] = []
    for _attempt in range(60):
        try:
            response = client.post(
                f"{base}/v1/certificates", json=body, headers={**headers, "Idempotency-Key": key}
            )
        except httpx.TransportError:
            time.sleep(0.1)
            continue
        if response.status_code == 201:
            acknowledged.append(response)
            return acknowledged
        assert response.status_code in (409, 429, 503), response.text
        time.sleep(min(float(response.headers.get("retry-after", "1")), 0.2))
    raise AssertionError(f"key {key} was never acknowledged")


def _metric(text: str, name: str, **labels: str) -> float:
    total = 0.0
    for line in text.splitlines():
        if line.startswith(name + "{"):
            found = dict(re.findall(r'(\w+)="([^"]*)"', line.rsplit(" ", 1)[0]))
            if all(found.get(k) == v for k, v in labels.items()):
                total += float(line.rsplit(" ", 1)[1])
    return total


def test_two_processes_share_certificates_and_idempotency(servers: tuple[list[str], str]) -> None:
    urls, token = servers
    headers = {"Authorization": f"Bearer {token}"}
    with httpx.Client(base_url=urls[0], timeout=30, headers=headers) as setup:
        regularity, plan = prepare(setup)
        assert setup.get("/v1/certificates").status_code == 200
        anonymous = httpx.get(f"{urls[1]}/v1/certificates", timeout=5)
        assert anonymous.status_code == 401  # the key created on the side closes both

    rng = random.Random(20240601)
    jobs = [(f"scale-{i}", certificate_body(regularity, plan, rng)) for i in range(N_REQUESTS)]
    results: dict[str, list[httpx.Response]] = {key: [] for key, _ in jobs}
    lock = threading.Lock()

    def run_job(index: int) -> None:
        key, body = jobs[index]
        first, second = urls[index % 2], urls[(index + 1) % 2]
        with httpx.Client(timeout=30, headers=headers) as client:
            got = _post_until_acknowledged(client, first, body, key, {})
            # a client that timed out and retries on the other process, twice at once
            with ThreadPoolExecutor(2) as racing:
                retries = list(
                    racing.map(
                        lambda base: _post_until_acknowledged(client, base, body, key, {}),
                        [second, first],
                    )
                )
        with lock:
            results[key].extend(got + retries[0] + retries[1])

    with ThreadPoolExecutor(N_CLIENTS) as pool:
        list(pool.map(run_job, range(N_REQUESTS)))

    ids: set[str] = set()
    for key, responses in results.items():
        assert len(responses) == 3, key
        assert len({r.content for r in responses}) == 1, f"{key} got different documents"
        assert sum(r.headers.get("idempotent-replayed") != "true" for r in responses) == 1
        ids.add(responses[0].json()["id"])
    assert len(ids) == N_REQUESTS  # distinct inputs, one certificate each, none twice

    with httpx.Client(timeout=30, headers=headers) as client:
        for base in urls:
            listed = client.get(f"{base}/v1/certificates", params={"limit": 500}).json()
            assert sorted(item["id"] for item in listed["items"]) == sorted(ids)
            for cid in ids:
                assert client.get(f"{base}/v1/certificates/{cid}").status_code == 200
        expected_201 = sum(len(r) for r in results.values())
        for base in urls:  # either process reports the requests of both
            scraped = client.get(f"{base}/metrics").text
            assert (
                _metric(
                    scraped,
                    "boundsvc_http_requests_total",
                    method="POST",
                    route="/v1/certificates",
                    status="201",
                )
                == expected_201
            )
            assert _metric(scraped, "boundsvc_certificates") == N_REQUESTS
