"""``boundsvc gate``: every exit code (0 pass, 1 fail, 2 usage, 3 service), human and JSON."""

from __future__ import annotations

import datetime as dt
import json
import socket
from collections.abc import Callable
from typing import Any

import httpx
import pytest

from api_schemas import Certificate
from boundsvc.cli import main
from boundsvc.cli._common import UsageError
from boundsvc.cli.gate import Thresholds, evaluate, parse_duration
from tests.cli.conftest import Result, Runner, Stored
from tests.client.test_http import certificate_body

Scripted = Callable[..., Result]


# -- the pure part ---------------------------------------------------------------------


def cert(**changes: Any) -> Certificate:
    body = certificate_body()
    body.update(changes)
    return Certificate.model_validate(body)


NOW = dt.datetime(2025, 1, 3, tzinfo=dt.UTC)  # two days after certificate_body's created_at


def test_checks_of_a_valid_certificate() -> None:
    checks = evaluate(
        cert(), Thresholds(max_l2=0.05, max_final=0.01, max_age_seconds=86400 * 3), now=NOW
    )
    assert [(c.name, c.passed) for c in checks] == [
        ("status", True),
        ("L2 space-time bound", True),
        ("L2 final-time bound", False),
        ("age", True),
    ]
    assert checks[2].value == 0.02 and checks[2].limit == 0.01
    assert checks[3].value == pytest.approx(2 * 86400)


def test_a_vacuous_bound_fails_every_threshold() -> None:
    vacuous = cert(status="vacuous", bound={"l2_space_time": None, "l2_final_time": None})
    checks = evaluate(vacuous, Thresholds(max_l2=1e9, require_status="any"))
    assert [(c.name, c.actual, c.passed) for c in checks] == [
        ("L2 space-time bound", "no finite bound", False)
    ]
    assert not evaluate(vacuous, Thresholds())[0].passed  # status valid is the default


def test_age_check() -> None:
    assert not evaluate(cert(), Thresholds(max_age_seconds=86400), now=NOW)[-1].passed


@pytest.mark.parametrize(
    ("text", "seconds"),
    [
        ("7d", 604800),
        ("12h", 43200),
        ("90m", 5400),
        ("1d12h", 129600),
        ("2w", 1209600),
        ("0.5h", 1800),
        ("30s", 30),
    ],
)
def test_durations(text: str, seconds: float) -> None:
    assert parse_duration(text) == seconds


@pytest.mark.parametrize("text", ["7", "d", "7 days", "-1d", "1y", ""])
def test_bad_durations(text: str) -> None:
    with pytest.raises(UsageError, match="--max-age"):
        parse_duration(text)


def test_threshold_validation() -> None:
    with pytest.raises(UsageError, match="--max-l2 must be a finite number >= 0"):
        Thresholds(max_l2=-1.0)
    with pytest.raises(UsageError, match="nothing to check"):
        Thresholds(require_status="any")


# -- exit 0 and 1 against the in-process app ------------------------------------------------


def test_pass_by_id(run: Runner, stored: Stored) -> None:
    r = run("gate", stored.certificate_id, "--max-l2", "1", "--max-final", "1", "--max-age", "1h")
    assert r.code == 0, r.out + r.err
    assert r.out.startswith("boundsvc gate: PASS")
    assert "[pass] status: valid" in r.out and "[pass] age" in r.out
    assert len(r.out.splitlines()) <= 24  # one screen


def test_pass_by_model_json(run: Runner, stored: Stored) -> None:
    r = run("gate", "--model", stored.model, "--version", stored.version, "--json")
    assert r.code == 0
    verdict = r.json()
    assert verdict["verdict"] == "pass" and verdict["exit_code"] == 0
    assert verdict["certificate"]["id"] == stored.certificate_id
    assert verdict["selector"] == {"model": "cli-heat", "version": "7"}
    assert verdict["checks"][0]["name"] == "status"


def test_fail_on_a_threshold(run: Runner, stored: Stored) -> None:
    r = run("gate", stored.certificate_id, "--max-l2", "1e-12")
    assert r.code == 1
    assert r.out.startswith("boundsvc gate: FAIL")
    assert "[FAIL] L2 space-time bound" in r.out
    r = run("gate", stored.certificate_id, "--max-l2", "1e-12", "--json")
    verdict = r.json()
    assert (verdict["verdict"], verdict["exit_code"]) == ("fail", 1)
    failed = [c for c in verdict["checks"] if not c["passed"]]
    assert failed[0]["name"] == "L2 space-time bound" and failed[0]["limit"] == 1e-12


def test_fail_on_status(run: Runner, stored: Stored) -> None:
    r = run("gate", stored.certificate_id, "--require-status", "vacuous")
    assert r.code == 1 and "[FAIL] status: valid (required vacuous)" in r.out


def test_fail_without_a_certificate(run: Runner) -> None:
    r = run("gate", "--model", "never-certified", "--json")
    assert r.code == 1
    assert r.json()["verdict"] == "fail"
    assert "no certificate for model 'never-certified'" in r.json()["reason"]
    r = run("gate", "crt_unknown")
    assert r.code == 1 and "no certificate 'crt_unknown'" in r.out


def test_fail_on_age(run_scripted: Scripted) -> None:
    def old(request: httpx.Request) -> httpx.Response:
        return httpx.Response(200, json=certificate_body())  # created 2025-01-01

    r = run_scripted(old, "gate", "crt_1", "--max-age", "7d", "--json")
    assert r.code == 1
    age = next(c for c in r.json()["checks"] if c["name"] == "age")
    assert not age["passed"] and age["limit"] == 604800


# -- exit 2 -----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "argv",
    [
        ["gate"],
        ["gate", "crt_1", "--model", "m"],
        ["gate", "crt_1", "--version", "3"],
        ["gate", "crt_1", "--max-age", "soon"],
        ["gate", "crt_1", "--max-l2", "-1"],
        ["gate", "crt_1", "--max-final", "nan"],
        ["gate", "crt_1", "--require-status", "any"],
    ],
)
def test_usage_errors_exit_2(run: Runner, argv: list[str]) -> None:
    r = run(*argv)
    assert r.code == 2, r.out
    assert r.err.startswith("boundsvc gate:")
    r = run(*argv, "--json")
    assert r.code == 2 and r.json()["verdict"] == "usage-error"


@pytest.mark.parametrize(
    "argv", [["gate", "crt_1", "--max-l2", "small"], ["gate", "crt_1", "--require-status", "great"]]
)
def test_argparse_errors_exit_2(argv: list[str]) -> None:
    with pytest.raises(SystemExit) as info:
        main(argv)
    assert info.value.code == 2


# -- exit 3 -----------------------------------------------------------------------------------


def test_service_down_exits_3(capsys: pytest.CaptureFixture[str]) -> None:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]  # closed once the block ends: nothing listens there
    code = main(["gate", "crt_1", "--url", f"http://127.0.0.1:{port}", "--retries", "0", "--json"])
    captured = capsys.readouterr()
    assert code == 3
    verdict = json.loads(captured.out)
    assert (verdict["verdict"], verdict["exit_code"]) == ("error", 3)
    assert verdict["error"]["code"] == "unreachable"
    assert "ERROR - cannot consult the service" in captured.err


@pytest.mark.parametrize(
    ("status", "code"), [(500, "internal_error"), (503, "store_unavailable"), (401, "unauthorized")]
)
def test_service_failures_exit_3(run_scripted: Scripted, status: int, code: str) -> None:
    def failing(request: httpx.Request) -> httpx.Response:
        return httpx.Response(
            status,
            json={"title": "t", "status": status, "detail": "d", "code": code, "request_id": "rid"},
        )

    r = run_scripted(failing, "gate", "--model", "m", "--json")
    assert r.code == 3
    assert r.json()["error"]["code"] == code
