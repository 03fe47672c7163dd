"""One round trip over real sockets: ``python -m boundsvc.cli serve`` in a subprocess, the
client, and ``boundsvc gate`` against it."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest

from boundsvc.cli import main
from boundsvc.client import BoundsvcClient
from tests.client.test_adapters import HEAT
from tests.client.test_roundtrip import REGULARITY, residuals

REPO = Path(__file__).resolve().parents[2]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture
def service(tmp_path: Path) -> Iterator[str]:
    port = _free_port()
    env = {**os.environ, "OPENBLAS_NUM_THREADS": "1"}
    env.pop("BOUNDSVC_API_KEY", None)
    proc = subprocess.Popen(
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
            f"sqlite:///{tmp_path / 'serve.sqlite3'}",
        ],
        cwd=REPO,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
    )
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                if httpx.get(f"{url}/v1/health", timeout=1.0).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if proc.poll() is not None or time.monotonic() > deadline:
                err = proc.stderr.read().decode() if proc.stderr else ""
                pytest.fail(f"boundsvc serve did not start: {err[-2000:]}")
            time.sleep(0.1)
        yield url
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:  # pragma: no cover
            proc.kill()
            proc.wait()
        if proc.stderr:
            proc.stderr.close()


@pytest.mark.subprocess
def test_certify_and_gate_over_http(service: str, capsys: pytest.CaptureFixture[str]) -> None:
    with BoundsvcClient(service) as client:
        plan = client.plan(HEAT, points={"t": 8, "x": 8})
        seen: list[tuple[int, int]] = []
        cert = client.certify(
            HEAT,
            plan,
            REGULARITY,
            residuals(plan),
            model={"name": "socket-heat", "version": "1"},
            progress=lambda done, total: seen.append((done, total)),
        )
    assert cert.status == "valid"
    assert seen[-1][0] == seen[-1][1] > 0  # the streamed upload arrived whole
    capsys.readouterr()
    code = main(
        [
            "gate",
            "--url",
            service,
            "--model",
            "socket-heat",
            "--version",
            "1",
            "--max-l2",
            "1",
            "--json",
        ]
    )
    assert code == 0, capsys.readouterr()
    assert f'"id": "{cert.id}"' in capsys.readouterr().out
