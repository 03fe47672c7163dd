"""Shared pieces: the benchmark problems and plans, payload encoders, statistics, tables."""

from __future__ import annotations

import base64
import io
import json
import os
import platform
import statistics
import time
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

HEAT_1D: dict[str, Any] = {"equation": "u_t = u_xx", "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]}
REG_1D: dict[str, float | str] = {"sup_abs_u_x": 2.0, "sup_abs_model_u_x": 2.5}
HEAT_2D: dict[str, Any] = {
    "equation": "u_t = u_xx + u_yy",
    "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
    "time": [0.0, 1.0],
}
REG_2D: dict[str, float | str] = {"sup_grad_u": 2.0, "sup_grad_model_u": 2.5}

TRANSPORTS = ("json-list", "base64", "npz", "octet")


@dataclass
class Case:
    """One certificate size: a problem, a Gauss-Legendre plan and how often to repeat."""

    label: str
    problem: dict[str, Any]
    regularity: dict[str, float | str]
    points: dict[str, int]
    panels: dict[str, int]
    repeats: int
    transports: tuple[str, ...] = TRANSPORTS
    note: str = ""
    once: tuple[str, ...] = ()  # transports sent in the first repeat only (slow ones)
    # filled by prepare()
    problem_id: str = ""
    plan_id: str = ""
    spec: dict[str, Any] = field(default_factory=dict)
    classified: Any = None
    plan: Any = None
    arrays: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def n_interior(self) -> int:
        return int(self.arrays["interior"].size)

    @property
    def n_values(self) -> int:
        return int(sum(a.size for a in self.arrays.values()))

    @property
    def payload_bytes(self) -> int:
        return 8 * self.n_values

    @property
    def n_time(self) -> int:
        return int(self.plan.time.size)


def prepare(case: Case, seed: int = 1) -> Case:
    """Classify, build the plan in process (same spec as the server), draw the residuals."""
    from api_schemas import PlanRequest, ProblemSpec
    from boundsvc.api.routes._resolve import problem_id_of
    from boundsvc.certify import build_plan, derive, plan_spec

    spec = ProblemSpec.model_validate(case.problem)
    case.classified = derive(spec)
    case.problem_id = problem_id_of(spec)
    request = PlanRequest(problem_id=case.problem_id, points=case.points, panels=case.panels)
    case.spec = plan_spec(request, case.problem_id)
    case.plan = build_plan(case.classified, case.spec)
    case.plan_id = case.plan.plan_id
    rng = np.random.default_rng(seed)
    case.arrays = {
        name: rng.normal(scale=1e-3, size=comp.size).astype("<f8")
        for name, comp in case.plan.components.items()
    }
    return case


def seed_store(database_url: str, case: Case) -> None:
    """Store the problem and plan rows the server resolves ``problem_id``/``plan_id`` against.

    POST /v1/plans returns every point and weight as JSON (about 62 MB and seconds at 1e6
    points), so large plans are registered through the store instead (same rows).
    """
    from boundsvc.store import open_store

    store = open_store(database_url)
    try:
        spec_json = case.classified.problem.spec.model_dump(mode="json")
        store.put_problem(case.problem_id, spec_json, case.classified.family.id)
        store.put_plan(case.plan_id, case.spec, problem_id=case.problem_id)
    finally:
        store.dispose()


def head(case: Case, epoch: int) -> dict[str, Any]:
    """The request without residuals (``epoch`` makes each repeat a new certificate)."""
    return {
        "problem_id": case.problem_id,
        "plan_id": case.plan_id,
        "regularity": case.regularity,
        "model": {"name": "bench", "version": "1", "epoch": epoch},
    }


@dataclass
class Payload:
    body: bytes
    headers: dict[str, str]
    path: str


class Encoder:
    """Request bodies of one transport. The residual part is encoded once (``encode_seconds``
    is that client-side cost); each repeat only splices in a new request head."""

    def __init__(self, case: Case, transport: str) -> None:
        self.case = case
        self.transport = transport
        start = time.perf_counter()
        self._part: bytes = b""
        if transport == "json-list":
            res = {k: v.tolist() for k, v in case.arrays.items()}
            self._part = json.dumps(res).encode()
        elif transport == "base64":
            self._part = json.dumps(
                {
                    k: {
                        "dtype": "float64",
                        "encoding": "base64",
                        "data": base64.b64encode(v.tobytes()).decode(),
                    }
                    for k, v in case.arrays.items()
                }
            ).encode()
        elif transport == "npz":
            self._part = self._npz(0)
        elif transport == "octet":
            self._part = b"".join(case.arrays[n].tobytes() for n in case.plan.components)
        else:
            raise ValueError(transport)
        self.encode_seconds = time.perf_counter() - start

    def _npz(self, epoch: int) -> bytes:
        buf = io.BytesIO()
        req = json.dumps(head(self.case, epoch)).encode()
        np.savez(buf, request=np.frombuffer(req, dtype=np.uint8), **self.case.arrays)
        return buf.getvalue()

    @staticmethod
    def header(case: Case, epoch: int) -> str:
        """``X-Boundsvc-Request``: base64url of the request head."""
        return base64.urlsafe_b64encode(json.dumps(head(case, epoch)).encode()).decode().rstrip("=")

    def payload(self, epoch: int) -> Payload:
        req = head(self.case, epoch)
        if self.transport in ("json-list", "base64"):
            prefix = json.dumps(req)[:-1].encode() + b', "residuals": '
            return Payload(
                prefix + self._part + b"}", {"content-type": "application/json"}, "/v1/certificates"
            )
        if self.transport == "npz":
            body = self._part if epoch == 0 else self._npz(epoch)
            return Payload(body, {"content-type": "application/x-npz"}, "/v1/certificates/upload")
        return Payload(
            self._part,
            {
                "content-type": "application/octet-stream",
                "x-boundsvc-request": self.header(self.case, epoch),
            },
            "/v1/certificates/upload",
        )


def timed(fn: Callable[[], Any]) -> tuple[float, Any]:
    start = time.perf_counter()
    out = fn()
    return time.perf_counter() - start, out


def median(values: Iterable[float]) -> float:
    vals = list(values)
    return statistics.median(vals) if vals else float("nan")


def ms(seconds: float) -> str:
    if seconds != seconds:  # nan
        return "-"
    return f"{seconds * 1e3:.1f}" if seconds < 10 else f"{seconds * 1e3:.0f}"


def mb(n: float) -> str:
    return f"{n / 1e6:.1f}"


def table(headers: Sequence[str], rows: Iterable[Sequence[object]]) -> str:
    lines = ["| " + " | ".join(headers) + " |", "|" + "---|" * len(headers)]
    lines += ["| " + " | ".join(str(c) for c in row) + " |" for row in rows]
    return "\n".join(lines)


def loadavg() -> str:
    try:
        return " ".join(Path("/proc/loadavg").read_text().split()[:3])
    except OSError:  # pragma: no cover
        return "?"


def machine() -> dict[str, str]:
    import httpx
    import scipy

    cpu = "?"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:  # pragma: no cover
        pass
    mem = "?"
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemTotal"):
                mem = f"{int(line.split()[1]) / 1024**2:.1f} GiB"
    except OSError:  # pragma: no cover
        pass
    return {
        "nproc": str(os.cpu_count()),
        "cpu": cpu,
        "memory": mem,
        "kernel": platform.release(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "httpx": httpx.__version__,
        "OPENBLAS_NUM_THREADS": os.environ.get("OPENBLAS_NUM_THREADS", ""),
    }
