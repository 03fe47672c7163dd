"""A real ``boundsvc serve`` subprocess on a free loopback port with a temporary SQLite file."""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from types import TracebackType
from typing import Any

import httpx

ROOT = Path(__file__).resolve().parent.parent


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def proc_status(pid: int) -> dict[str, int]:
    """VmRSS / VmHWM / VmPeak of a process in bytes (Linux ``/proc/<pid>/status``)."""
    out: dict[str, int] = {}
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        key, _, rest = line.partition(":")
        if key in ("VmRSS", "VmHWM", "VmPeak"):
            out[key] = int(rest.split()[0]) * 1024
    return out


def cpu_seconds(pid: int) -> float:
    """On-CPU time of every live thread of a process (``/proc/<pid>/task/*/schedstat``, ns)."""
    total = 0
    for task in Path(f"/proc/{pid}/task").iterdir():
        try:
            total += int((task / "schedstat").read_text().split()[0])
        except (OSError, ValueError, IndexError):
            continue
    return total / 1e9


class Server:
    """``python -m boundsvc.cli serve`` (one worker, so the Popen pid is the server process).

    The access log (``BOUNDSVC_LOG_LEVEL=info``) goes to a file: its ``duration_ms`` per
    ``X-Request-ID`` is the server-side time of a request. The rate limit is raised so
    that the benchmark is not throttled (the limiter middleware still runs).
    """

    def __init__(self, database: Path | None = None) -> None:
        self._tmp = Path(tempfile.mkdtemp(prefix="boundsvc-bench-"))
        self.database = database or self._tmp / "bench.sqlite3"
        self.url_db = f"sqlite:///{self.database}"
        self.port = free_port()
        self.base_url = f"http://127.0.0.1:{self.port}"
        self.log_path = self._tmp / "server.log"
        self.proc: subprocess.Popen[bytes] | None = None
        self.startup_seconds = float("nan")
        self.client: httpx.Client | None = None

    def start(self) -> Server:
        env = dict(os.environ)
        env.update(
            OPENBLAS_NUM_THREADS="1",
            BOUNDSVC_LOG_LEVEL="info",
            BOUNDSVC_RATE_LIMIT_PER_MINUTE="10000000",
            PYTHONPATH=str(ROOT) + os.pathsep + env.get("PYTHONPATH", ""),
        )
        env.pop("BOUNDSVC_DATABASE_URL", None)
        log = self.log_path.open("ab")
        started = time.perf_counter()
        self.proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "boundsvc.cli",
                "serve",
                "--host",
                "127.0.0.1",
                "--port",
                str(self.port),
                "--database-url",
                self.url_db,
                "--log-level",
                "warning",
            ],
            cwd=ROOT,
            env=env,
            stdout=log,
            stderr=log,
        )
        log.close()
        self.client = httpx.Client(base_url=self.base_url, timeout=900.0)
        deadline = started + 180.0
        while True:
            if self.proc.poll() is not None:
                raise RuntimeError(f"server exited: {self.log_path.read_text()[-2000:]}")
            try:
                if self.client.get("/v1/health").status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if time.perf_counter() > deadline:
                raise RuntimeError("server did not become healthy in 180 s")
            time.sleep(0.05)
        self.startup_seconds = time.perf_counter() - started
        return self

    @property
    def pid(self) -> int:
        assert self.proc is not None
        return self.proc.pid

    def cpu_seconds(self) -> float:
        return cpu_seconds(self.pid)

    def reset_peak(self) -> bool:
        """Reset VmHWM to the current RSS (``echo 5 > /proc/<pid>/clear_refs``)."""
        try:
            Path(f"/proc/{self.pid}/clear_refs").write_text("5")
            return True
        except OSError:
            return False

    def status(self) -> dict[str, int]:
        return proc_status(self.pid)

    def durations_ms(self) -> dict[str, float]:
        """Server-side duration of each logged request, by request id."""
        out: dict[str, float] = {}
        if not self.log_path.exists():
            return out
        for line in self.log_path.read_text(errors="replace").splitlines():
            if not line.startswith("{"):
                continue
            try:
                entry: dict[str, Any] = json.loads(line)
            except ValueError:
                continue
            if entry.get("message") == "request" and "request_id" in entry:
                out[str(entry["request_id"])] = float(entry["duration_ms"])
        return out

    def stop(self) -> None:
        if self.client is not None:
            self.client.close()
            self.client = None
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        self.proc = None

    def cleanup(self) -> None:
        self.stop()
        shutil.rmtree(self._tmp, ignore_errors=True)

    def __enter__(self) -> Server:
        return self.start()

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.cleanup()
