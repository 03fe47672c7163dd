"""Part 2: peak memory (VmHWM) of the server process during one large certificate.

A fresh server per transport: VmHWM is read at idle and after a rejected request that makes
the server rebuild and cache the plan (422, wrong length). The plan rebuild peaks higher
than the certificate itself, so VmHWM is then reset to the current RSS (``clear_refs``)
and read again after the certificate: extra peak = VmHWM after - RSS before. It is
compared with the payload (8 bytes per value).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from bench._common import Case, Encoder, mb, prepare, seed_store, table, timed
from bench._server import Server


def case() -> Case:
    """The 1e7-value case of part 1 (2-D heat, 9 time nodes, 1000 x 1000 space nodes)."""
    from bench.certificates import case as sized

    return sized("1e7", repeats=1)


@dataclass
class MemoryResult:
    transport: str
    body_bytes: int
    payload_bytes: int
    idle: int
    after_plan: int
    rss_before: int
    after_certificate: int
    seconds: float
    reset: bool

    @property
    def extra(self) -> int:
        return self.after_certificate - self.rss_before


def measure(c: Case, transport: str) -> MemoryResult:
    enc = Encoder(c, transport)
    payload = enc.payload(1)
    with Server() as server:
        seed_store(server.url_db, c)
        assert server.client is not None
        idle = server.status()["VmHWM"]
        bad = server.client.post(
            "/v1/certificates/upload",
            content=b"\0" * 8,
            headers={
                "content-type": "application/octet-stream",
                "x-boundsvc-request": Encoder.header(c, 0),
            },
        )
        if bad.status_code != 422:
            raise RuntimeError(f"plan warm-up: {bad.status_code} {bad.text[:300]}")
        after_plan = server.status()["VmHWM"]
        reset = server.reset_peak()
        rss_before = server.status()["VmRSS"] if reset else after_plan
        seconds, r = timed(
            lambda: server.client.post(  # type: ignore[union-attr]
                payload.path, content=payload.body, headers=payload.headers
            )
        )
        if r.status_code != 201:
            raise RuntimeError(f"{transport}: {r.status_code} {r.text[:300]}")
        after = server.status()["VmHWM"]
    return MemoryResult(
        transport,
        len(payload.body),
        c.payload_bytes,
        idle,
        after_plan,
        rss_before,
        after,
        seconds,
        reset,
    )


def run(quick: bool = False, log: Any = print) -> list[MemoryResult]:
    c = prepare(case())
    transports = ("octet",) if quick else ("octet", "npz", "base64")
    out = []
    for t in transports:
        res = measure(c, t)
        log(f"  {t}: extra peak {mb(res.extra)} MB for a {mb(res.payload_bytes)} MB payload")
        out.append(res)
    return out


def render(results: list[MemoryResult]) -> str:
    head = [
        "transport",
        "payload MB (8 B/value)",
        "body MB",
        "VmHWM idle MB",
        "VmHWM after plan rebuild MB",
        "RSS before certificate MB",
        "VmHWM after certificate MB",
        "extra peak of the certificate MB",
        "extra / payload",
        "plan rebuild extra MB",
        "request s",
    ]
    rows = [
        [
            r.transport,
            mb(r.payload_bytes),
            mb(r.body_bytes),
            mb(r.idle),
            mb(r.after_plan),
            mb(r.rss_before) + ("" if r.reset else " (no reset)"),
            mb(r.after_certificate),
            mb(r.extra),
            f"{r.extra / r.payload_bytes:.2f}x",
            mb(r.after_plan - r.idle),
            f"{r.seconds:.2f}",
        ]
        for r in results
    ]
    return table(head, rows)
