"""Part 1: end-to-end certificate time per transport against the in-process core function.

One 2-D heat problem (``u_t = u_xx + u_yy`` on the unit square, 9 Gauss time nodes) at
N = 1e5, 1e6 and 1e7 residual values (interior + initial + boundary). For each size the plan
is built in this process with the server's own functions and registered in the server's
database; residuals are random normal (scale 1e-3). Each repeat is a new certificate (a new
``model.epoch``), so the server classifies (cached), looks the plan up (cached after the
warm-up request), receives, decodes, validates and hashes the arrays, certifies and stores.
Client timing starts with a body already encoded; the client's encoding cost is a separate
column. Transports: ``json-list`` (JSON arrays of numbers; one repeat only at 1e7, where
encoding and parsing take seconds), ``base64`` (base64 strings in the JSON body),
``npz`` and ``octet`` (binary upload; httpx client) and ``octet-httpclient`` (the same
octet-stream upload sent with the standard library's ``http.client``, which costs the
client far less CPU than httpx at 80 MB).
"""

from __future__ import annotations

import http.client
import itertools
import time
from dataclasses import dataclass, field
from typing import Any

from bench._common import (
    HEAT_2D,
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


# 2-D heat with the same 9-node time grid at every size: the fixed cost of the core (the
# Gronwall propagation and the Young-weight search depend on the time grid, not on N) is the
# same in every row, so the rows show how each transport scales with N.
SIZES = {
    "1e5": ({"t": 9, "x": 100, "y": 100}, {}, 5),
    "1e6": ({"t": 9, "x": 250, "y": 200}, {"y": 2}, 3),
    "1e7": ({"t": 9, "x": 250, "y": 250}, {"x": 4, "y": 4}, 3),
}
BINARY = ("npz", "octet", "octet-httpclient")


def case(size: str, transports: tuple[str, ...] | None = None, repeats: int | None = None) -> Case:
    points, panels, k = SIZES[size]
    transports = transports or ("json-list", "base64", *BINARY)
    return Case(
        f"2-D heat, N = {size}",
        HEAT_2D,
        REG_2D,
        points,
        panels,
        repeats if repeats is not None else k,
        transports,
        # JSON lists at 1e7: seconds to encode in the client and to parse, GBs of objects
        once=("json-list",) if size == "1e7" else (),
    )


def cases(quick: bool = False) -> list[Case]:
    """N = 1e5, 1e6 and 1e7 values (interior + initial + boundary) of one 2-D heat problem;
    ``quick`` keeps one repeat at 1e7."""
    return [case("1e5"), case("1e6"), case("1e7", repeats=1 if quick else None)]


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
    error: str = ""
    response_bytes: int = 0


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


def _post_httpclient(
    server: Server, path: str, body: bytes, headers: dict[str, str]
) -> tuple[int, int]:
    """POST with the standard library's client; (status, response bytes)."""
    conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=900)
    try:
        conn.request("POST", path, body=body, headers=headers)
        resp = conn.getresponse()
        return resp.status, len(resp.read())
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
        seconds, (status, tr.response_bytes) = timed(
            lambda: _post_httpclient(server, payload.path, payload.body, headers)
        )
        text = ""
    else:
        seconds, r = timed(lambda: client.post(payload.path, content=payload.body, headers=headers))
        status, text = r.status_code, r.text[:500]
        tr.response_bytes = len(r.content)
    tr.client_cpu_s.append(time.process_time() - cpu_client)
    tr.server_cpu_s.append(server.cpu_seconds() - cpu_server)
    if status != 201:
        # recorded, not fatal: the table says which transport failed at which size and why
        tr.error = f"HTTP {status}: {text[:160]}"
        return
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
    for k in range(case.repeats):
        wall, cpu = _inprocess(case)
        inproc.append(wall)
        inproc_cpu.append(cpu)
        for t, enc in encoders.items():
            if results[t].error or (k > 0 and t in case.once):
                continue
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
        "first request ms (plan rebuild; the very first also lazy imports)",
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
        "response KB",
    ]
    rows_b = []
    for r in results:
        base = median(r.inprocess_s)
        base_cpu = median(r.inprocess_cpu_s)
        for t in r.transports:
            if not t.e2e_s:
                rows_b.append([r.case.label, t.transport, mb(t.body_bytes), ms(t.encode_s)])
                rows_b[-1] += [f"failed: {t.error}"] + [""] * 7
                continue
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
                    f"{t.response_bytes / 1e3:.1f}",
                ]
            )
    return part_a + "\n\n" + table(head_b, rows_b)
