"""Load and soak runs against a real ``boundsvc serve`` on loopback, and its process helpers.

``python tools/soak.py`` (``make soak``) runs, in order:

1. **load**: ``--certificates`` distinct certificates (default 2,000) from ``--clients``
   concurrent clients (16), each with ``--values`` interior residual values (1e4, base64),
   against ``--workers`` uvicorn workers (2) over a fresh SQLite file; every answer must be a
   201, every certificate distinct, listed and fetchable; latency percentiles are printed.
2. **memory**: ``--requests`` more requests (10,000; half certificate POSTs, half GETs of
   stored certificates) while the resident memory of the whole server process tree (the
   supervisor, its workers and their symbolic sandbox workers, ``VmRSS`` from
   ``/proc/<pid>/status``) is sampled; growth after warm-up must stay within ``--margin-mib``.

Traffic goes only to 127.0.0.1, the loops are bounded in count, and the server is stopped at
the end.  The bounded forms of the same runs are tests/hardening/test_load.py (and the crash
test uses :class:`ServeProcess` too).  Prints a JSON summary with ``--json``.
"""

from __future__ import annotations

import argparse
import base64
import contextlib
import json
import os
import signal
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from collections.abc import Callable, Iterator
from concurrent.futures import ThreadPoolExecutor
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import httpx
import numpy as np

ROOT = Path(__file__).resolve().parent.parent
MIB = 1024 * 1024

TIME_NODES = 10
#: A heat equation whose plan has exactly ``t * x`` interior points.
PROBLEM: dict[str, Any] = {
    "equation": "u_t = k*u_xx",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 0.5],
    "parameters": {"k": 0.4},
}


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def _children(pid: int) -> list[int]:
    out: list[int] = []
    with contextlib.suppress(OSError):
        for task in Path(f"/proc/{pid}/task").iterdir():
            with contextlib.suppress(OSError):
                out.extend(int(c) for c in (task / "children").read_text().split())
    return out


def process_tree(pid: int) -> list[int]:
    """``pid`` and all its descendants (Linux ``/proc/<pid>/task/*/children``)."""
    tree, todo = [], [pid]
    while todo:
        current = todo.pop()
        tree.append(current)
        todo.extend(_children(current))
    return tree


def rss_bytes(pid: int) -> int:
    """``VmRSS`` of one process in bytes (0 if it is gone)."""
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) * 1024
    except OSError:
        pass
    return 0


class ServeProcess:
    """``python -m boundsvc.cli serve`` on a free loopback port, in its own process group
    (so that :meth:`kill` takes the workers and sandbox processes down with it)."""

    def __init__(
        self, database_url: str, *, workers: int = 1, log_path: Path | None = None
    ) -> None:
        self.database_url = database_url
        self.workers = workers
        self.port = free_port()
        self.base_url = f"http://127.0.0.1:{self.port}"
        self.log_path = log_path
        self.proc: subprocess.Popen[bytes] | None = None

    def start(self, timeout: float = 120.0) -> ServeProcess:
        env = dict(os.environ)
        env.update(
            OPENBLAS_NUM_THREADS="1",
            BOUNDSVC_LOG_LEVEL="warning",
            BOUNDSVC_RATE_LIMIT_PER_MINUTE="0",  # one client address sends everything
            PYTHONPATH=str(ROOT) + os.pathsep + env.get("PYTHONPATH", ""),
        )
        for name in ("BOUNDSVC_DATABASE_URL", "BOUNDSVC_API_KEY", "PROMETHEUS_MULTIPROC_DIR"):
            env.pop(name, None)
        argv = [sys.executable, "-m", "boundsvc.cli", "serve", "--host", "127.0.0.1"]
        argv += ["--port", str(self.port), "--database-url", self.database_url]
        argv += ["--workers", str(self.workers)]
        log = self.log_path.open("ab") if self.log_path else subprocess.DEVNULL
        try:
            self.proc = subprocess.Popen(  # noqa: S603 - our own CLI, fixed argv
                argv, cwd=ROOT, env=env, stdout=log, stderr=log, start_new_session=True
            )
        finally:
            if self.log_path:
                log.close()  # type: ignore[union-attr]
        deadline = time.monotonic() + timeout
        while True:
            if self.proc.poll() is not None:
                raise RuntimeError(f"server exited with {self.proc.returncode}: {self.log()}")
            with contextlib.suppress(httpx.TransportError):
                if httpx.get(f"{self.base_url}/v1/health", timeout=1.0).status_code == 200:
                    return self
            if time.monotonic() > deadline:
                self.stop()
                raise RuntimeError(f"server not healthy within {timeout:g} s: {self.log()}")
            time.sleep(0.05)

    def log(self) -> str:
        if self.log_path is None or not self.log_path.exists():
            return ""
        return self.log_path.read_text(errors="replace")[-3000:]

    @property
    def pid(self) -> int:
        assert self.proc is not None
        return self.proc.pid

    def rss(self) -> int:
        """Resident memory of the whole server process tree, in bytes."""
        return sum(rss_bytes(p) for p in process_tree(self.pid))

    def kill(self) -> None:
        """SIGKILL the process group: no shutdown handler, no flush, no goodbye."""
        if self.proc is not None and self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGKILL)
            self.proc.wait(timeout=30)

    def stop(self) -> None:
        """SIGTERM the group (graceful), SIGKILL after 20 s."""
        if self.proc is None:
            return
        if self.proc.poll() is None:
            with contextlib.suppress(ProcessLookupError):
                os.killpg(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.kill()
        # sandbox workers left in the group (if their parent died first)
        with contextlib.suppress(ProcessLookupError, PermissionError):
            os.killpg(self.proc.pid, signal.SIGKILL)

    def __enter__(self) -> ServeProcess:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()


# -- the workload ---------------------------------------------------------------------------
@dataclass
class Workload:
    """One prepared problem and plan; :meth:`body` draws a distinct certificate request."""

    regularity: dict[str, float]
    plan_id: str
    sizes: dict[str, int]

    @classmethod
    def prepare(cls, client: httpx.Client, values: int, time_nodes: int = TIME_NODES) -> Workload:
        # few time nodes, many space nodes: the assembly's cost grows with the time nodes
        # (a Gronwall step each, see docs/reliability.md), the residual work with the values
        steps = time_nodes
        panels = max(1, -(-values // (steps * 250)))  # at most 256 points per panel
        per_panel = max(2, round(values / (steps * panels)))
        problem = client.post("/v1/problems", json={"problem": PROBLEM})
        problem.raise_for_status()
        regularity = {key: 3.0 for key in problem.json()["required_regularity"]}
        plan = client.post(
            "/v1/plans",
            json={
                "problem": PROBLEM,
                "points": {"t": steps, "x": per_panel},
                "panels": {"x": panels},
            },
        )
        plan.raise_for_status()
        document = plan.json()
        sizes = {c["name"]: int(c["size"]) for c in document["components"]}
        return cls(regularity, document["plan_id"], sizes)

    def body(self, seed: int) -> dict[str, Any]:
        rng = np.random.default_rng(seed)
        residuals = {
            name: {
                "dtype": "float64",
                "encoding": "base64",
                "data": base64.b64encode(
                    rng.uniform(-1e-3, 1e-3, size).astype("<f8").tobytes()
                ).decode(),
            }
            for name, size in self.sizes.items()
        }
        return {
            "problem": PROBLEM,
            "regularity": self.regularity,
            "plan_id": self.plan_id,
            "residuals": residuals,
            "model": {"name": "soak", "version": str(seed)},
        }


@dataclass
class LoadResult:
    requests: int
    clients: int
    values: int
    seconds: float
    errors: list[str] = field(default_factory=list)
    latencies_ms: list[float] = field(default_factory=list, repr=False)
    ids: set[str] = field(default_factory=set, repr=False)

    def percentiles(self) -> dict[str, float]:
        if not self.latencies_ms:
            return {}
        lat = np.asarray(self.latencies_ms)
        return {f"p{q}": round(float(np.percentile(lat, q)), 1) for q in (50, 90, 99)} | {
            "max": round(float(lat.max()), 1),
            "mean": round(float(lat.mean()), 1),
        }

    def summary(self) -> dict[str, Any]:
        out = {k: v for k, v in asdict(self).items() if k not in ("latencies_ms", "ids")}
        out["errors"] = self.errors[:10]
        out["error_count"] = len(self.errors)
        out["throughput_per_s"] = round(self.requests / self.seconds, 1) if self.seconds else 0
        out["latency_ms"] = self.percentiles()
        return out


def run_requests(
    base_url: str,
    jobs: int,
    clients: int,
    one: Callable[[httpx.Client, int], httpx.Response],
    expect: tuple[int, ...],
    on_done: Callable[[int], None] | None = None,
) -> LoadResult:
    """Send ``jobs`` requests (``one(client, index)``) from ``clients`` threads."""
    result = LoadResult(requests=jobs, clients=clients, values=0, seconds=0.0)
    lock = threading.Lock()
    counter = iter(range(jobs))

    def worker() -> None:
        with httpx.Client(base_url=base_url, timeout=120.0) as client:
            while True:
                with lock:
                    index = next(counter, None)
                if index is None:
                    return
                start = time.perf_counter()
                try:
                    response = one(client, index)
                    error = (
                        None
                        if response.status_code in expect
                        else f"#{index}: {response.status_code} {response.text[:200]}"
                    )
                except httpx.HTTPError as exc:
                    response, error = None, f"#{index}: {type(exc).__name__}: {exc}"
                elapsed = (time.perf_counter() - start) * 1000
                with lock:
                    result.latencies_ms.append(elapsed)
                    if error:
                        result.errors.append(error)
                    elif response is not None and response.status_code == 201:
                        result.ids.add(response.json()["id"])
                if on_done is not None:
                    on_done(index)

    started = time.perf_counter()
    with ThreadPoolExecutor(clients) as pool:
        for future in [pool.submit(worker) for _ in range(clients)]:
            future.result()
    result.seconds = time.perf_counter() - started
    return result


def post_certificates(
    base_url: str,
    workload: Workload,
    count: int,
    clients: int,
    *,
    seed0: int = 0,
    on_done: Callable[[int], None] | None = None,
) -> LoadResult:
    """``count`` distinct certificates (seeds ``seed0 .. seed0+count-1``)."""

    def one(client: httpx.Client, index: int) -> httpx.Response:
        return client.post("/v1/certificates", json=workload.body(seed0 + index))

    result = run_requests(base_url, count, clients, one, (201,), on_done)
    result.values = sum(workload.sizes.values())
    return result


def listed_ids(client: httpx.Client) -> list[str]:
    """Every certificate id in the store, through the paginated listing."""
    ids: list[str] = []
    cursor: str | None = None
    while True:
        params: dict[str, Any] = {"limit": 500} | ({"cursor": cursor} if cursor else {})
        page = client.get("/v1/certificates", params=params)
        page.raise_for_status()
        body = page.json()
        ids.extend(item["id"] for item in body["items"])
        cursor = body.get("next_cursor")
        if not cursor:
            return ids


@dataclass
class MemoryTrace:
    """Server-tree RSS samples (MiB) taken every ``every`` requests after warm-up."""

    every: int
    samples_mib: list[float] = field(default_factory=list)

    @property
    def baseline(self) -> float:
        return self.samples_mib[0]

    @property
    def growth(self) -> float:
        """Last sample minus the baseline: what stayed after the run."""
        return self.samples_mib[-1] - self.samples_mib[0]

    @property
    def peak_growth(self) -> float:
        return max(self.samples_mib) - self.samples_mib[0]

    @property
    def late_growth(self) -> float:
        """Growth over the second half of the run (median of the last three samples minus the
        median of the three around the middle): a leak keeps growing there, while the
        allocator's warm-up plateau (seen in the first samples) does not."""
        n = len(self.samples_mib)
        mid = n // 2
        late = statistics.median(self.samples_mib[-3:])
        middle = statistics.median(self.samples_mib[max(mid - 1, 0) : mid + 2])
        return late - middle


def memory_run(
    server: ServeProcess,
    workload: Workload,
    requests: int,
    clients: int,
    stored: list[str],
    *,
    every: int,
    seed0: int,
    post_every: int = 5,
) -> tuple[LoadResult, MemoryTrace]:
    """``requests`` requests: every ``post_every``-th POSTs a new certificate, the others GET
    a stored one (every tenth of those: a page of the listing); RSS of the server tree is
    sampled before and every ``every`` completed requests."""
    trace = MemoryTrace(every=every)
    trace.samples_mib.append(server.rss() / MIB)
    done = [0]
    lock = threading.Lock()

    def on_done(_: int) -> None:
        with lock:
            done[0] += 1
            if done[0] % every == 0:
                trace.samples_mib.append(server.rss() / MIB)

    def one(client: httpx.Client, index: int) -> httpx.Response:
        if index % post_every == 0:
            return client.post("/v1/certificates", json=workload.body(seed0 + index))
        if index % 10 == 1:
            return client.get("/v1/certificates", params={"limit": 100})
        return client.get(f"/v1/certificates/{stored[index % len(stored)]}")

    result = run_requests(server.base_url, requests, clients, one, (200, 201), on_done)
    trace.samples_mib.append(server.rss() / MIB)
    return result, trace


@contextlib.contextmanager
def temporary_server(workers: int, keep: Path | None = None) -> Iterator[ServeProcess]:
    """A server over a fresh SQLite file in a temporary directory."""
    with tempfile.TemporaryDirectory(prefix="boundsvc-soak-") as tmp:
        folder = keep or Path(tmp)
        server = ServeProcess(
            f"sqlite:///{folder / 'soak.sqlite3'}", workers=workers, log_path=folder / "server.log"
        )
        with server:
            yield server


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--certificates", type=int, default=2000)
    parser.add_argument("--clients", type=int, default=16)
    parser.add_argument("--values", type=int, default=10_000)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--requests", type=int, default=10_000)
    parser.add_argument("--post-every", type=int, default=5, help="memory run: POST share")
    parser.add_argument("--margin-mib", type=float, default=64.0)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args(argv)

    report: dict[str, Any] = {"cpus": os.cpu_count(), "load_average": os.getloadavg()}
    ok = True
    with (
        temporary_server(args.workers) as server,
        httpx.Client(base_url=server.base_url, timeout=120.0) as client,
    ):
        workload = Workload.prepare(client, args.values)
        # warm-up: every worker classifies once and starts its sandbox
        warm = post_certificates(
            server.base_url, workload, 4 * args.workers, args.workers, seed0=10**9
        )
        load = post_certificates(server.base_url, workload, args.certificates, args.clients)
        report["load"] = load.summary()
        stored = listed_ids(client)
        lost = set(load.ids) - set(stored)
        report["load"]["distinct_ids"] = len(load.ids)
        report["load"]["lost"] = len(lost)
        report["load"]["duplicates_listed"] = len(stored) - len(set(stored))
        ok &= not load.errors and not lost and len(load.ids) == args.certificates
        ok &= not warm.errors and len(stored) == len(set(stored))

        memory, trace = memory_run(
            server,
            workload,
            args.requests,
            args.clients,
            stored,
            every=max(1, args.requests // 20),
            seed0=2 * 10**9,
            post_every=args.post_every,
        )
        report["memory"] = memory.summary() | {
            "rss_mib_samples": [round(s, 1) for s in trace.samples_mib],
            "baseline_mib": round(trace.baseline, 1),
            "growth_mib": round(trace.growth, 1),
            "peak_growth_mib": round(trace.peak_growth, 1),
            "margin_mib": args.margin_mib,
        }
        ok &= not memory.errors and trace.growth <= args.margin_mib
        report["stored_certificates"] = len(listed_ids(client))
    report["ok"] = bool(ok)
    print(json.dumps(report, indent=None if args.json else 2))
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
