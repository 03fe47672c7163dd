"""Where the time goes: the server's decode steps and the core, timed in process.

Stage timings replay what the routes do (FastAPI parses a JSON body with ``json.loads``
and validates the dict against ``CertificateRequest``; the upload route calls
``decode_upload`` and ``split_octets``), then ``validate_residuals`` and ``certify`` under
cProfile (cumulative seconds of the main steps). Memory: tracemalloc peak of the decode
and validation steps.
"""

from __future__ import annotations

import cProfile
import hashlib
import json
import pstats
import tracemalloc
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from bench._common import (
    HEAT_1D,
    HEAT_2D,
    REG_1D,
    REG_2D,
    Case,
    Encoder,
    mb,
    ms,
    prepare,
    table,
    timed,
)

STEPS = (
    ("boundsvc/residuals.py", "validate_residuals"),
    ("boundsvc/certify.py", "parse_all_regularity"),
    ("", "energy_inequality"),
    ("boundsvc/assembly.py", "assemble_bound"),
    ("boundsvc/gronwall.py", "propagate"),
    ("boundsvc/gronwall.py", "_advance"),
    ("boundsvc/certify.py", "_quadrature_section"),
    ("boundsvc/certify.py", "_libraries"),
    ("boundsvc/certify.py", "_canonical"),
)


def cases() -> list[Case]:
    return [
        Case(
            "2-D heat, N = 1e7", HEAT_2D, REG_2D, {"t": 9, "x": 250, "y": 250}, {"x": 4, "y": 4}, 1
        ),
        # many time nodes, small N: the core's fixed cost (Gronwall propagation) dominates
        Case(
            "1-D heat, N = 1e5, 100 time nodes", HEAT_1D, REG_1D, {"t": 100, "x": 250}, {"x": 4}, 1
        ),
    ]


@dataclass
class StageResult:
    label: str
    n_values: int
    n_time: int
    decode: dict[str, tuple[float, int]] = field(default_factory=dict)  # seconds, peak bytes
    core: dict[str, tuple[float, int]] = field(default_factory=dict)  # cumulative s, calls
    certify_s: float = 0.0


def _measure(fn: Callable[[], Any]) -> tuple[float, int]:
    seconds, _ = timed(fn)  # timing without tracemalloc (it slows allocation down)
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return seconds, peak


def run_case(case: Case) -> StageResult:
    from api_schemas import CertificateRequest
    from boundsvc.api.routes._transport import decode_upload, split_octets
    from boundsvc.certify import certify
    from boundsvc.residuals import decode_values, validate_residuals

    prepare(case)
    n_eq = 1
    res = StageResult(case.label, case.n_values, case.n_time)
    if case.n_values <= 2_000_000:
        body = Encoder(case, "json-list").payload(1).body
        res.decode["json-list: json.loads"] = _measure(lambda: json.loads(body))
        obj = json.loads(body)
        res.decode["json-list: CertificateRequest.model_validate"] = _measure(
            lambda: CertificateRequest.model_validate(obj)
        )
        req = CertificateRequest.model_validate(obj)
        res.decode["json-list: decode_values (np.asarray of the list)"] = _measure(
            lambda: [decode_values(k, v, n_eq) for k, v in req.residuals.items()]
        )
    body = Encoder(case, "base64").payload(1).body
    res.decode["base64: json.loads"] = _measure(lambda: json.loads(body))
    obj = json.loads(body)
    res.decode["base64: CertificateRequest.model_validate"] = _measure(
        lambda: CertificateRequest.model_validate(obj)
    )
    req = CertificateRequest.model_validate(obj)
    res.decode["base64: decode_values (b64decode, frombuffer)"] = _measure(
        lambda: [decode_values(k, v, n_eq) for k, v in req.residuals.items()]
    )
    npz = Encoder(case, "npz").payload(1).body
    res.decode["npz: decode_upload (np.load of every member)"] = _measure(
        lambda: decode_upload("application/x-npz", npz, None)
    )
    octet = Encoder(case, "octet").payload(1)
    hdr = octet.headers["x-boundsvc-request"]
    res.decode["octet: decode_upload + split_octets"] = _measure(
        lambda: split_octets(
            decode_upload("application/octet-stream", octet.body, hdr)[1]["__raw__"],
            case.plan,
            None,
            n_eq,
        )
    )
    res.decode["octet: b''.join of 64 KiB chunks (Starlette request.body(); not used)"] = _measure(
        lambda: b"".join([octet.body[i : i + 65536] for i in range(0, len(octet.body), 65536)])
    )
    needed = case.classified.components()
    res.decode["validate_residuals (blocked isfinite, sha256 of the buffer)"] = _measure(
        lambda: validate_residuals(case.plan, case.arrays, needed, n_eq)
    )
    big = case.arrays["interior"]
    res.decode["  of which sha256(memoryview(arr)) of interior (as now)"] = _measure(
        lambda: hashlib.sha256(memoryview(big)).hexdigest()
    )
    res.decode["  before: sha256(arr.tobytes()) of interior (a copy)"] = _measure(
        lambda: hashlib.sha256(big.tobytes()).hexdigest()
    )
    res.decode["  of which np.isfinite(interior).all()"] = _measure(
        lambda: bool(np.isfinite(big).all())
    )
    assert hashlib.sha256(big.tobytes()).hexdigest() == hashlib.sha256(memoryview(big)).hexdigest()

    prof = cProfile.Profile()
    prof.enable()
    res.certify_s, _ = timed(
        lambda: certify(
            case.classified, case.problem_id, case.plan, case.regularity, case.arrays, None
        )
    )
    prof.disable()
    stats = pstats.Stats(prof).stats  # type: ignore[attr-defined]
    for fname, func in STEPS:
        total, calls = 0.0, 0
        for (file, _line, name), (cc, _nc, _tt, ct, _callers) in stats.items():
            if name == func and fname in file:
                total = max(total, ct)
                calls += cc
        res.core[func] = (total, calls)
    case.arrays = {}
    case.plan = None
    return res


def run(quick: bool = False, log: Any = print) -> list[StageResult]:
    out = []
    for case in cases()[: 1 if quick else None]:
        r = run_case(case)
        log(f"  {r.label}: certify under cProfile {r.certify_s:.2f} s")
        out.append(r)
    return out


def render(results: list[StageResult]) -> str:
    parts = []
    for r in results:
        parts.append(f"**{r.label}** ({r.n_values:,} values, {r.n_time} time nodes)\n")
        parts.append(
            table(
                ["decode / validation step", "ms", "tracemalloc peak MB"],
                [[k, ms(s), mb(p)] for k, (s, p) in r.decode.items()],
            )
        )
        parts.append("")
        parts.append(
            table(
                ["certify step (cProfile, cumulative)", "ms", "calls", "share of certify"],
                [[k, ms(s), c, f"{s / r.certify_s:.0%}"] for k, (s, c) in r.core.items()]
                + [["certify (total, under cProfile)", ms(r.certify_s), 1, "100%"]],
            )
        )
        parts.append("")
    return "\n".join(parts)


def why(results: list[StageResult]) -> str:
    """One line per profiled case: the share of the core's main steps (from this run)."""
    lines = ["**Where the core's time goes** (part 4; cProfile inflates Python-heavy steps):", ""]
    for r in results:
        total = r.certify_s or float("nan")
        prop = r.core.get("propagate", (0.0, 0))[0]
        energy = r.core.get("energy_inequality", (0.0, 0))[0]
        val = r.core.get("validate_residuals", (0.0, 0))[0]
        lines.append(
            f"- {r.label} ({r.n_values:,} values, {r.n_time} time nodes): certify "
            f"{ms(total)} ms; Gronwall propagation (all Young-weight trials) {ms(prop)} ms "
            f"({prop / total:.0%}), residual integrals with allowances (energy_inequality, "
            f"twice) {ms(energy)} ms ({energy / total:.0%}), validation and SHA-256 "
            f"{ms(val)} ms ({val / total:.0%})."
        )
    return "\n".join(lines)
