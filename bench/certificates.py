"""Part 1: end-to-end certificate time per transport against the in-process core function.

For each case the plan is built in this process with the server's own functions and
registered in the server's database; residuals are random normal (scale 1e-3). Each
repeat is a new certificate (a new ``model.epoch``), so the server classifies (cached),
rebuilds the plan (cached after the warm-up request), decodes, validates and hashes the
arrays, certifies and stores. Client timing starts with a body already encoded; the
client-side encoding cost is a separate column.
"""

from __future__ import annotations

import http.client
import itertools
import time
from dataclasses import dataclass, field
from typing import Any

from bench._common import (
    HEAT_1D,
    HEAT_2D,
    REG_1D,
    REG_2D,
    Case,
    Encoder,
    mb,
    median,
    ms,
    prepare,
    seed_store,
    table,
    timed,
)
from bench._server import Server

_EPOCHS = itertools.count(1)


def cases(quick: bool = False) -> list[Case]:
    """The brief's 1-D heat problem at 1e5, 1e6 and the largest plan the limits allow, and a
    2-D heat problem with 4 time nodes (cheapest core: isolates the transport overhead)."""
    out = [
        Case("1-D heat, 1e5", HEAT_1D, REG_1D, {"t": 25, "x": 250}, {"x": 16}, 3),
        Case("1-D heat, 1e6", HEAT_1D, REG_1D, {"t": 250, "x": 250}, {"x": 16}, 2),
    ]
    if not quick:
        out.append(
            Case(
                "1-D heat, 4e6 (largest)",
                HEAT_1D,
                REG_1D,
                {"t": 250, "x": 250},
                {"t": 4, "x": 16},
                1,
                ("base64", "npz", "octet"),
                note="1e7 is refused by the plan limits",
            )
        )
    out += [
        Case("2-D heat, 1e5", HEAT_2D, REG_2D, {"t": 4, "x": 160, "y": 160}, {}, 5),
        Case("2-D heat, 1e6", HEAT_2D, REG_2D, {"t": 4, "x": 250, "y": 250}, {"x": 2, "y": 2}, 3),
        Case(
            "2-D heat, 4e6 (largest)",
            HEAT_2D,
            REG_2D,
            {"t": 4, "x": 250, "y": 250},
            {"x": 4, "y": 4},
            3,
            ("base64", "npz", "octet", "octet-httpclient"),
        ),
    ]
    return out


@dataclass
class TransportResult:
    transport: str
    body_bytes: int
    encode_s: float
    e2e_s: list[float] = field(default_factory=list)
    server_s: list[float] = field(default_factory=list)
    server_cpu_s: list[float] = field(default_factory=list)
    client_cpu_s: list[float] = field(default_factory=list)
    request_ids: list[str] = field(default_factory=list)


@dataclass
class CaseResult:
    case: Case
    inprocess_s: list[float]
    inprocess_cpu_s: list[float]
    first_request_s: float
    transports: list[TransportResult]
    n_interior: int = 0
    n_values: int = 0
    payload_bytes: int = 0
    n_time: int = 0


def _inprocess(case: Case) -> tuple[float, float]:
    from api_schemas import ModelInfo
    from boundsvc.certify import certify

    model = ModelInfo(name="bench", version="1", epoch=0)
    cpu = time.process_time()
    seconds, _ = timed(
        lambda: certify(
            case.classified, case.problem_id, case.plan, case.regularity, case.arrays, model
        )
    )
    return seconds, time.process_time() - cpu


def _post_httpclient(server: Server, path: str, body: bytes, headers: dict[str, str]) -> int:
    conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=900)
    try:
        conn.request("POST", path, body=body, headers=headers)
        resp = conn.getresponse()
        resp.read()
        return resp.status
    finally:
        conn.close()


def _request(server: Server, case: Case, enc: Encoder, tr: TransportResult) -> None:
    payload = enc.payload(next(_EPOCHS))
    tr.body_bytes = len(payload.body)
    rid = f"bench{next(_EPOCHS)}"
    headers = {**payload.headers, "x-request-id": rid}
    client = server.client
    assert client is not None
    cpu_server = server.cpu_seconds()
    cpu_client = time.process_time()
    if tr.transport == "octet-httpclient":
        seconds, status = timed(
            lambda: _post_httpclient(server, payload.path, payload.body, headers)
        )
        text = ""
    else:
        seconds, r = timed(lambda: client.post(payload.path, content=payload.body, headers=headers))
        status, text = r.status_code, r.text[:500]
    tr.client_cpu_s.append(time.process_time() - cpu_client)
    tr.server_cpu_s.append(server.cpu_seconds() - cpu_server)
    if status != 201:
        raise RuntimeError(f"{case.label} {tr.transport}: {status} {text}")
    tr.e2e_s.append(seconds)
    tr.request_ids.append(rid)


def run_case(server: Server, case: Case) -> CaseResult:
    """Repeats are interleaved (in-process, then each transport, k times) so that a change
    of the machine's load hits every column alike."""
    prepare(case)
    seed_store(server.url_db, case)
    # warm-up (not timed as a repeat): the server rebuilds and caches the plan
    warm = Encoder(case, "octet").payload(next(_EPOCHS))
    assert server.client is not None
    first, resp = timed(
        lambda: server.client.post(
            warm.path,
            content=warm.body,  # type: ignore[union-attr]
            headers=warm.headers,
        )
    )
    if resp.status_code != 201:
        raise RuntimeError(f"{case.label}: warm-up {resp.status_code} {resp.text[:500]}")
    encoders = {
        t: Encoder(case, "octet" if t == "octet-httpclient" else t) for t in case.transports
    }
    results = {t: TransportResult(t, 0, e.encode_seconds) for t, e in encoders.items()}
    inproc: list[float] = []
    inproc_cpu: list[float] = []
    for _ in range(case.repeats):
        wall, cpu = _inprocess(case)
        inproc.append(wall)
        inproc_cpu.append(cpu)
        for t, enc in encoders.items():
            _request(server, case, enc, results[t])
    encoders.clear()
    time.sleep(0.2)  # the access log line is written after the response
    logged = server.durations_ms()
    for tr in results.values():
        tr.server_s = [logged.get(rid, float("nan")) / 1e3 for rid in tr.request_ids]
    return CaseResult(
        case,
        inproc,
        inproc_cpu,
        first,
        list(results.values()),
        case.n_interior,
        case.n_values,
        case.payload_bytes,
        case.n_time,
    )


def run(quick: bool = False, log: Any = print) -> list[CaseResult]:
    out: list[CaseResult] = []
    with Server() as server:
        log(f"  server up in {server.startup_seconds:.1f} s (pid {server.pid})")
        for case in cases(quick):
            res = run_case(server, case)
            log(
                f"  {case.label}: in-process {ms(median(res.inprocess_s))} ms; "
                + ", ".join(f"{t.transport} {ms(median(t.e2e_s))} ms" for t in res.transports)
            )
            case.arrays = {}
            case.plan = None
            out.append(res)
    return out


def render(results: list[CaseResult]) -> str:
    head = [
        "case",
        "interior N",
        "values sent",
        "payload MB",
        "time nodes",
        "k",
        "in-process ms",
        "in-process CPU ms",
        "first request ms (plan rebuild)",
    ]
    rows = []
    for r in results:
        c = r.case
        rows.append(
            [
                c.label,
                f"{r.n_interior:,}",
                f"{r.n_values:,}",
                mb(r.payload_bytes),
                r.n_time,
                c.repeats,
                ms(median(r.inprocess_s)),
                ms(median(r.inprocess_cpu_s)),
                ms(r.first_request_s),
            ]
        )
    part_a = table(head, rows)
    head_b = [
        "case",
        "transport",
        "body MB",
        "client encode ms",
        "end-to-end ms",
        "ratio (wall)",
        "e2e - in-process ms",
        "server log ms",
        "server CPU ms",
        "ratio (server CPU / in-process CPU)",
        "client CPU ms",
    ]
    rows_b = []
    for r in results:
        base = median(r.inprocess_s)
        base_cpu = median(r.inprocess_cpu_s)
        for t in r.transports:
            e2e = median(t.e2e_s)
            cpu = median(t.server_cpu_s)
            rows_b.append(
                [
                    r.case.label,
                    t.transport,
                    mb(t.body_bytes),
                    ms(t.encode_s),
                    ms(e2e),
                    f"{e2e / base:.2f}x",
                    ms(e2e - base),
                    ms(median(t.server_s)),
                    ms(cpu),
                    f"{cpu / base_cpu:.2f}x",
                    ms(median(t.client_cpu_s)),
                ]
            )
    return part_a + "\n\n" + table(head_b, rows_b)
