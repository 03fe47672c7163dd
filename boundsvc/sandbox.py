"""Bounded symbolic work: derivations are tried first in a worker process with a wall-clock
budget and CPU and memory limits.

Our grammar limits the size of an expression, but sympy can still be made to work for minutes
on small text (``(u + x + 1)^20 * (u - x)^20`` expands to thousands of terms). Before a problem
is classified in the service process, the same classification runs in a worker process: if the
worker does not answer within the budget it is killed (and replaced) and the request is refused
with ``problem_too_complex`` (422); if every worker is busy the request is refused at once with
``service_busy`` (503), so the service stays responsive. A worker that finished proves the
derivation is cheap; the service then classifies in-process (and caches the result).
"""

from __future__ import annotations

import atexit
import contextlib
import json
import os
import select
import subprocess
import sys
import threading
import time
from typing import Any

from boundsvc.errors import BoundsvcError, TooComplex


class ServiceBusy(BoundsvcError):
    """Every symbolic worker is busy (HTTP 503, code ``service_busy``)."""

    status = 503
    title = "Service busy"


def _worker_main() -> None:  # pragma: no cover - runs in the child process
    """Read JSON jobs from stdin, answer one JSON line per job on stdout."""
    import json
    import resource
    import sys

    memory = int(os.environ.get("BOUNDSVC_SANDBOX_MEMORY", str(2048 * 1024 * 1024)))
    with contextlib.suppress(ValueError, OSError):
        resource.setrlimit(resource.RLIMIT_AS, (memory, memory))
    from api_schemas import ProblemSpec
    from boundsvc.families import classify

    print(json.dumps({"status": "ready"}), flush=True)
    for line in sys.stdin:
        job = json.loads(line)
        _, hard = resource.getrlimit(resource.RLIMIT_CPU)
        used = int(time.process_time()) + 1
        with contextlib.suppress(ValueError, OSError):
            resource.setrlimit(resource.RLIMIT_CPU, (used + int(job["cpu"]) + 1, hard))
        try:
            classified = classify(ProblemSpec.model_validate(job["problem"]))
            classified.constants()
            classified.description()
            answer = "ok"
        except BoundsvcError:
            answer = "refused"
        except MemoryError:
            answer = "memory"
        except Exception:
            answer = "error"
        print(json.dumps({"status": answer}), flush=True)


class _Worker:
    """One worker process (``python -m boundsvc.sandbox``) talking JSON lines over pipes."""

    def __init__(self, memory_bytes: int) -> None:
        env = dict(os.environ, BOUNDSVC_SANDBOX_MEMORY=str(memory_bytes), OPENBLAS_NUM_THREADS="1")
        self.process = subprocess.Popen(
            [sys.executable, "-m", "boundsvc.sandbox"],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.DEVNULL,
            env=env,
            text=True,
            bufsize=1,
        )
        self.ready = False

    def ask(self, problem: dict[str, Any], budget: float) -> str:
        assert self.process.stdin is not None and self.process.stdout is not None
        if not self.ready:
            # the first answer of a fresh worker is "ready" after its imports
            if not _readable(self.process.stdout, 60.0):
                return "crashed"
            if json.loads(self.process.stdout.readline() or "{}").get("status") != "ready":
                return "crashed"
            self.ready = True
        self.process.stdin.write(json.dumps({"problem": problem, "cpu": budget}) + "\n")
        self.process.stdin.flush()
        if not _readable(self.process.stdout, budget):
            return "timeout"
        line = self.process.stdout.readline()
        if not line:
            return "crashed"
        return str(json.loads(line).get("status", "crashed"))

    def kill(self) -> None:
        self.process.kill()
        with contextlib.suppress(subprocess.TimeoutExpired):
            self.process.wait(timeout=5)
        for stream in (self.process.stdin, self.process.stdout):
            if stream is not None:
                with contextlib.suppress(OSError):
                    stream.close()


def _readable(stream: Any, timeout: float) -> bool:
    ready, _, _ = select.select([stream], [], [], timeout)
    return bool(ready)


class SymbolicSandbox:
    """A small pool of worker processes that dry-run derivations under a budget."""

    def __init__(self, workers: int = 2, memory_mb: int = 2048) -> None:
        self._memory = memory_mb * 1024 * 1024
        self._size = workers
        self._idle: list[_Worker] = []
        self._count = 0
        self._lock = threading.Lock()
        self._pid = os.getpid()

    def _take(self, wait: float) -> _Worker:
        deadline = time.monotonic() + wait
        while True:
            with self._lock:
                if self._pid != os.getpid():  # forked: the workers belong to the parent
                    self._idle, self._count, self._pid = [], 0, os.getpid()
                if self._idle:
                    return self._idle.pop()
                if self._count < self._size:
                    self._count += 1
                    break
            if time.monotonic() >= deadline:
                raise ServiceBusy(
                    "service_busy", "every symbolic worker is busy; retry shortly", "problem"
                )
            time.sleep(0.01)
        try:
            return _Worker(self._memory)
        except Exception:
            with self._lock:
                self._count -= 1
            raise

    def _give_back(self, worker: _Worker) -> None:
        with self._lock:
            self._idle.append(worker)

    def _discard(self, worker: _Worker) -> None:
        worker.kill()
        with self._lock:
            self._count -= 1

    def check(self, problem: dict[str, Any], budget_seconds: float) -> str:
        """Dry-run the classification of ``problem``; raise TooComplex past the budget.

        Returns the worker's verdict (``ok``, ``refused``, ...): a refusal is reproduced, with
        its detail, by the in-process classification that follows.
        """
        worker = self._take(wait=min(1.0, budget_seconds))
        try:
            status = worker.ask(problem, budget_seconds)
        except (OSError, ValueError):
            status = "crashed"
        if status in ("timeout", "crashed", "memory"):
            self._discard(worker)
            reason = {
                "timeout": f"did not finish within {budget_seconds:g} s",
                "crashed": "exceeded the worker's CPU or memory limit",
                "memory": "exceeded the worker's memory limit",
            }[status]
            raise TooComplex(
                "problem_too_complex",
                f"the symbolic derivation of this problem {reason}; simplify the "
                "equation (e.g. avoid large powers of sums)",
                "problem.equation",
            )
        self._give_back(worker)
        return str(status)

    def close(self) -> None:
        with self._lock:
            idle, self._idle = self._idle, []
        for worker in idle:
            worker.kill()


_SANDBOX: SymbolicSandbox | None = None
_SANDBOX_LOCK = threading.Lock()


def sandbox() -> SymbolicSandbox:
    """The process's sandbox (created on first use)."""
    global _SANDBOX
    with _SANDBOX_LOCK:
        if _SANDBOX is None:
            _SANDBOX = SymbolicSandbox()
            atexit.register(_SANDBOX.close)
        return _SANDBOX


if __name__ == "__main__":  # pragma: no cover - the worker process
    _worker_main()
