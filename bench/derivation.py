"""Part 3: problem derivation (POST /v1/problems) per family, cold and warm.

Over HTTP, for each family a fresh server: ``cold`` is the first POST /v1/problems after
start (lazy imports, parse, classification, symbolic constants); ``new`` is a first request
for another problem of the same family on the now warm server (no derivation cache hit;
only the time interval, or a space interval, differs); ``warm`` is the same request
repeated (median; the derivation cache answers). Server-side times come from the access log.

In process, in a fresh interpreter per family: ``import boundsvc.certify``, the first
``classify`` (cold), ``classify`` of another problem, ``classify`` repeated (no cache) and
``derive`` repeated (content-hash cache), and ``problem_summary`` repeated (the response
body: constants rendered as text and LaTeX) and the store write of the route
(``put_problem`` of an existing row, SQLite). ``GET /v1/health`` on the same server is the
floor of any request (middlewares, access log).
"""

from __future__ import annotations

import copy
import json
import os
import subprocess
import sys
import time
from dataclasses import dataclass, field
from typing import Any

from bench._common import median, ms, table
from bench._server import ROOT, Server

# one representative each (taken from tests/families/); keys: family id
REPRESENTATIVES: dict[str, dict[str, Any]] = {
    "ode-system": {
        "equation": "y_t = 1 + y^2",
        "unknowns": ["y"],
        "time": [0.0, 1.0],
        "initial_value": "0",
    },
    "linear-advection-diffusion-reaction": {
        "equation": "u_t + a*u_x = k*u_xx - c*u",
        "space": {"x": [0.0, 3.0]},
        "time": [0.0, 1.0],
        "parameters": {"a": 1.5, "k": 0.1, "c": 0.3},
    },
    "semilinear-parabolic": {
        "equation": "u_t = e^2*u_xx + u - u^3",
        "space": {"x": [-1.0, 1.0]},
        "time": [0.0, 1.0],
        "parameters": {"e": 0.2},
        "boundary": "dirichlet",
        "initial_value": "tanh(x/(sqrt(2)*e))",
        "boundary_value": "tanh(x/(sqrt(2)*e))",
    },
    "linear-elliptic": {
        "equation": "-u_xx = pi^2*sin(pi*x)",
        "space": {"x": [0.0, 2.0]},
        "boundary_value": "0",
    },
    "wave": {  # the fixed string, as in tests/contract/test_wave_http.py
        "equation": "u_tt = 4*u_xx",
        "space": {"x": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "boundary": "dirichlet",
        "initial_value": "sin(pi*x)",
        "initial_velocity": "0",
        "boundary_value": "0",
    },
    "incompressible-navier-stokes": {  # 2-D, as in tests/families/test_navier_stokes.py
        "equation": [
            "u_t + u*u_x + v*u_y + p_x = nu*(u_xx + u_yy)",
            "v_t + u*v_x + v*v_y + p_y = nu*(v_xx + v_yy)",
            "u_x + v_y = 0",
        ],
        "unknowns": ["u", "v", "p"],
        "space": {"x": [0.0, 1.0], "y": [0.0, 1.0]},
        "time": [0.0, 1.0],
        "parameters": {"nu": 0.1},
    },
    "scalar-conservation-law": {
        "equation": "u_t + u*u_x = nu*u_xx",
        "space": {"x": [-1.0, 1.0]},
        "time": [0.0, 1.0],
        "parameters": {"nu": 0.1},
        "boundary": "dirichlet",
        "initial_value": "0.25 - 0.75*tanh(1.5*x/(4*nu))",
        "boundary_value": "0.25 - 0.75*tanh(1.5*(x - 0.25*t)/(4*nu))",
    },
}
WARM_REPEATS = 20


def variant(problem: dict[str, Any], i: int) -> dict[str, Any]:
    """Another problem of the same shape (a different final time, or for a steady problem
    a different end of the first space axis: a new content hash)."""
    out = copy.deepcopy(problem)
    if "time" in out:
        out["time"] = [out["time"][0], out["time"][1] + 1e-3 * i]
    else:
        axis = next(iter(out["space"]))
        low, high = out["space"][axis]
        out["space"][axis] = [low, high + 1e-3 * i]
    return out


def representatives() -> dict[str, dict[str, Any]]:
    """The representatives of the families registered now (a family without one is listed
    with an empty problem and reported as not measured)."""
    from boundsvc.families import CATALOGUE

    return {f.id: REPRESENTATIVES.get(f.id, {}) for f in CATALOGUE}


@dataclass
class DerivationResult:
    family: str
    http_cold_s: float = float("nan")
    http_cold_server_s: float = float("nan")
    http_family_cold_server_s: float = float("nan")
    http_new_server_s: float = float("nan")
    http_warm_s: list[float] = field(default_factory=list)
    http_warm_server_s: list[float] = field(default_factory=list)
    http_health_server_s: list[float] = field(default_factory=list)
    inprocess: dict[str, float] = field(default_factory=dict)
    classified_as: str = ""
    error: str = ""


def _http(family: str, problem: dict[str, Any], other: dict[str, Any] | None) -> DerivationResult:
    """Two fresh servers: on the first, this family's problem is the first request (cold
    start: lazy imports, the derivation worker); on the second a problem of ``other``
    family goes first, so the family's first problem measures its own derivation cost."""
    res = DerivationResult(family)
    with Server() as server:
        client = server.client
        assert client is not None
        res.http_cold_s, r = _timed_post(client, problem, "cold")
        if r.status_code != 200:
            res.error = f"{r.status_code} {r.text[:200]}"
            return res
        time.sleep(0.2)
        res.http_cold_server_s = server.durations_ms().get("cold", float("nan")) / 1e3
    with Server() as server:
        client = server.client
        assert client is not None
        if other is not None:
            _timed_post(client, other, "other")
        _, r = _timed_post(client, problem, "family-cold")
        if r.status_code != 200:
            res.error = f"{r.status_code} {r.text[:200]}"
            return res
        res.classified_as = r.json().get("family", "")
        _timed_post(client, variant(problem, 1), "new")
        ids = []
        for i in range(WARM_REPEATS):
            seconds, _ = _timed_post(client, problem, f"warm{i}")
            res.http_warm_s.append(seconds)
            ids.append(f"warm{i}")
        health = []
        for i in range(WARM_REPEATS):
            client.get("/v1/health", headers={"x-request-id": f"health{i}"})
            health.append(f"health{i}")
        time.sleep(0.2)
        logged = server.durations_ms()
        if other is not None:
            res.http_family_cold_server_s = logged.get("family-cold", float("nan")) / 1e3
        res.http_new_server_s = logged.get("new", float("nan")) / 1e3
        res.http_warm_server_s = [logged.get(i, float("nan")) / 1e3 for i in ids]
        res.http_health_server_s = [logged.get(i, float("nan")) / 1e3 for i in health]
    return res


def _timed_post(client: Any, problem: dict[str, Any], rid: str) -> tuple[float, Any]:
    start = time.perf_counter()
    r = client.post("/v1/problems", json={"problem": problem}, headers={"x-request-id": rid})
    return time.perf_counter() - start, r


def inprocess_probe(problem: dict[str, Any]) -> dict[str, float]:
    """Run in a fresh interpreter (``python -m bench.derivation PROBLEM_JSON``)."""
    t0 = time.perf_counter()
    from api_schemas import ProblemSpec
    from boundsvc.certify import derive
    from boundsvc.families import classify

    out = {"import_s": time.perf_counter() - t0}
    spec = ProblemSpec.model_validate(problem)
    t = time.perf_counter()
    classify(spec)
    out["classify_cold_s"] = time.perf_counter() - t
    other = ProblemSpec.model_validate(variant(problem, 1))
    t = time.perf_counter()
    classify(other)
    out["classify_new_s"] = time.perf_counter() - t
    times = []
    for _ in range(5):
        t = time.perf_counter()
        classify(spec)
        times.append(time.perf_counter() - t)
    out["classify_repeat_s"] = median(times)
    derive(spec)
    times = []
    for _ in range(WARM_REPEATS):
        t = time.perf_counter()
        derive(spec)
        times.append(time.perf_counter() - t)
    out["derive_warm_s"] = median(times)
    # the body of POST /v1/problems (constants as text and LaTeX, hypotheses, ...)
    from boundsvc.api.routes._resolve import problem_id_of
    from boundsvc.certify import problem_summary

    classified = derive(spec)
    pid = problem_id_of(spec)
    times = []
    for _ in range(WARM_REPEATS):
        t = time.perf_counter()
        problem_summary(classified, pid)
        times.append(time.perf_counter() - t)
    out["summary_warm_s"] = median(times)
    # the store write every POST /v1/problems makes (an existing row: checked, not rewritten)
    import tempfile

    from boundsvc.store import open_store

    with tempfile.TemporaryDirectory() as tmp:
        store = open_store(f"sqlite:///{tmp}/probe.sqlite3")
        body = spec.model_dump(mode="json")
        store.put_problem(pid, body, classified.family.id)
        times = []
        for _ in range(WARM_REPEATS):
            t = time.perf_counter()
            store.put_problem(pid, body, classified.family.id)
            times.append(time.perf_counter() - t)
        store.dispose()
    out["store_warm_s"] = median(times)
    return out


def _inprocess(problem: dict[str, Any]) -> dict[str, float]:
    env = dict(
        os.environ,
        OPENBLAS_NUM_THREADS="1",
        PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""),
    )
    proc = subprocess.run(
        [sys.executable, "-m", "bench.derivation", json.dumps(problem)],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        timeout=300,
    )
    if proc.returncode != 0:
        raise RuntimeError(proc.stderr[-1000:])
    return dict(json.loads(proc.stdout.strip().splitlines()[-1]))


def run(quick: bool = False, log: Any = print) -> list[DerivationResult]:
    out = []
    reps = representatives()
    for family, problem in reps.items():
        if not problem:
            out.append(DerivationResult(family, error="no representative problem in bench"))
            continue
        other = next((p for f, p in reps.items() if p and f != family), None)
        res = _http(family, problem, other)
        if not res.error:
            res.inprocess = _inprocess(problem)
        log(
            f"  {family}: cold {ms(res.http_cold_s)} ms, warm "
            f"{ms(median(res.http_warm_s))} ms {res.error}"
        )
        out.append(res)
    return out


def render(results: list[DerivationResult]) -> str:
    head = [
        "family",
        "HTTP first request after start ms (client / server)",
        "HTTP first problem of the family ms (server)",
        "HTTP new problem, same family ms (server)",
        "HTTP warm ms (client / server)",
        "import ms",
        "classify cold ms",
        "classify new ms",
        "classify repeated ms",
        "derive warm ms",
        "response body (problem_summary) warm ms",
        "store.put_problem repeated ms (SQLite)",
        "GET /v1/health server ms",
    ]
    rows = []
    for r in results:
        if r.error:
            rows.append([r.family, r.error, *[""] * 11])
            continue
        ip = r.inprocess
        rows.append(
            [
                r.family + ("" if r.classified_as == r.family else f" (as {r.classified_as})"),
                f"{ms(r.http_cold_s)} / {ms(r.http_cold_server_s)}",
                ms(r.http_family_cold_server_s),
                ms(r.http_new_server_s),
                f"{ms(median(r.http_warm_s))} / {ms(median(r.http_warm_server_s))}",
                ms(ip["import_s"]),
                ms(ip["classify_cold_s"]),
                ms(ip["classify_new_s"]),
                f"{ip['classify_repeat_s'] * 1e3:.2f}",
                f"{ip['derive_warm_s'] * 1e3:.3f}",
                f"{ip['summary_warm_s'] * 1e3:.2f}",
                f"{ip['store_warm_s'] * 1e3:.2f}",
                f"{median(r.http_health_server_s) * 1e3:.2f}",
            ]
        )
    return table(head, rows)


if __name__ == "__main__":
    print(json.dumps(inprocess_probe(json.loads(sys.argv[1]))))
