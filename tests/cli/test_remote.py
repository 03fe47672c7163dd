"""``boundsvc problem | plan | certify | show | list | report`` against the in-process app."""

from __future__ import annotations

import io
import json
import socket
from collections.abc import Callable
from pathlib import Path

import httpx
import numpy as np
import pytest

from boundsvc.cli import main
from boundsvc.cli._progress import ProgressBar
from boundsvc.client import Plan
from tests.cli.conftest import HEAT, Result, Runner, Stored, write_residuals


def test_problem_prints_family_and_formulas(run: Runner, files: dict[str, Path]) -> None:
    r = run("problem", str(files["problem"]))
    assert r.code == 0, r.err
    assert "family linear-advection-diffusion-reaction" in r.out
    assert "needs regularity:" in r.out and "sup_abs_u_x" in r.out
    assert "constants:" in r.out and "LaTeX:" in r.out
    assert "| " in r.out  # the derivation steps


def test_problem_json_and_wrapped_file(run: Runner, files: dict[str, Path]) -> None:
    wrapped = files["dir"] / "wrapped.json"
    wrapped.write_text(json.dumps({"problem": HEAT}))
    r = run("problem", str(wrapped), "--json", "--regularity", str(files["regularity"]))
    assert r.code == 0, r.err
    body = r.json()
    assert body["problem_id"].startswith("prb_")
    assert body["family"] == "linear-advection-diffusion-reaction"


def test_problem_the_service_refuses_exits_1(run: Runner, files: dict[str, Path]) -> None:
    bad = files["dir"] / "bad.json"
    bad.write_text(json.dumps({**HEAT, "equation": "u_t = u_xx + foo("}))
    r = run("problem", str(bad))
    assert r.code == 1
    assert "422" in r.err
    r = run("problem", str(bad), "--json")
    assert r.code == 1 and r.json()["error"]["status"] == 422


def test_unreadable_files_are_usage_errors(run: Runner, files: dict[str, Path]) -> None:
    broken = files["dir"] / "broken.json"
    broken.write_text("{not json")
    r = run("problem", str(broken))
    assert r.code == 2 and "not valid JSON" in r.err
    r = run("problem", str(files["dir"] / "missing.json"))
    assert r.code == 2 and "cannot read the problem file" in r.err


@pytest.mark.parametrize("suffix", [".npz", ".json"])
def test_plan_writes_a_plan_file(run: Runner, files: dict[str, Path], suffix: str) -> None:
    out = files["dir"] / f"plan{suffix}"
    r = run("plan", str(files["problem"]), "--points", "t=6,x=6", "-o", str(out))
    assert r.code == 0, r.err
    assert "interior 36, initial 6, boundary 12 points" in r.out
    plan = Plan.load(out)
    assert plan.sizes == {"interior": 36, "initial": 6, "boundary": 12}
    assert plan.plan_id in r.out


def test_plan_json_summary(run: Runner, files: dict[str, Path]) -> None:
    r = run("plan", str(files["problem"]), "--points", "t=6,x=6", "--panels", "t=2", "--json")
    assert r.code == 0, r.err
    body = r.json()
    assert body["components"]["interior"] == {"size": 72, "axes": ["t", "x"]}
    assert body["plan_id"].startswith("pln_")


@pytest.mark.parametrize("points", ["t32", "t=x", ""])
def test_plan_bad_points_are_usage_errors(run: Runner, files: dict[str, Path], points: str) -> None:
    r = run("plan", str(files["problem"]), "--points", points)
    assert r.code == 2 and "--points" in r.err


def test_plan_output_suffix_is_checked(run: Runner, files: dict[str, Path]) -> None:
    r = run("plan", str(files["problem"]), "--points", "t=6,x=6", "-o", "plan.txt")
    assert r.code == 2 and ".npz or .json" in r.err


def test_certify_from_files(run: Runner, files: dict[str, Path], stored: Stored) -> None:
    res = write_residuals(files["dir"] / "residuals.npz", stored.plan)
    args = [
        "certify",
        "--problem",
        str(files["problem"]),
        "--regularity",
        str(files["regularity"]),
        "--plan-id",
        stored.plan.plan_id,
        "--residuals",
        str(res),
        "--model-name",
        "cli-heat",
        "--model-version",
        "7",
        "--epoch",
        "100",
    ]
    r = run(*args)
    assert r.code == 0, r.err
    assert f"certificate {stored.certificate_id}" in r.out  # same inputs, same certificate
    assert "status valid" in r.out
    r = run(*args, "--json")
    assert r.code == 0 and r.json()["id"] == stored.certificate_id


def test_certify_with_a_plan_file_and_problem_id(
    run: Runner, files: dict[str, Path], stored: Stored
) -> None:
    plan_file = files["dir"] / "plan.npz"
    stored.plan.save(plan_file)
    res = write_residuals(files["dir"] / "r.npz", stored.plan)
    r = run(
        "certify",
        "--problem-id",
        stored.plan.problem_id,
        "--regularity",
        str(files["regularity"]),
        "--plan",
        str(plan_file),
        "--residuals",
        str(res),
        "--json",
    )
    assert r.code == 0, r.err
    assert r.json()["provenance"]["plan_id"] == stored.plan.plan_id


def test_certify_usage_errors(run: Runner, files: dict[str, Path], stored: Stored) -> None:
    res = write_residuals(files["dir"] / "r.npz", stored.plan)
    base = ["certify", "--regularity", str(files["regularity"]), "--residuals", str(res)]
    r = run(*base, "--plan-id", stored.plan.plan_id)
    assert r.code == 2 and "--problem" in r.err
    r = run(*base, "--problem", str(files["problem"]))
    assert r.code == 2 and "--plan-id" in r.err
    pickled = files["dir"] / "pickled.npz"
    np.savez(pickled, interior=np.array([object()], dtype=object))
    r = run(
        "certify",
        "--problem",
        str(files["problem"]),
        "--regularity",
        str(files["regularity"]),
        "--plan-id",
        stored.plan.plan_id,
        "--residuals",
        str(pickled),
    )
    assert r.code == 2 and "pickled.npz" in r.err  # allow_pickle=False refuses it


def test_certify_refused_residuals_exit_1(
    run: Runner, files: dict[str, Path], stored: Stored
) -> None:
    short = files["dir"] / "short.npz"
    np.savez(short, interior=np.zeros(3), initial=np.zeros(8), boundary=np.zeros(16))
    r = run(
        "certify",
        "--problem",
        str(files["problem"]),
        "--regularity",
        str(files["regularity"]),
        "--plan-id",
        stored.plan.plan_id,
        "--residuals",
        str(short),
    )
    assert r.code == 1 and "residual_length" in r.err


def test_show_and_list(run: Runner, stored: Stored) -> None:
    r = run("show", stored.certificate_id)
    assert r.code == 0, r.err
    for text in ("status valid", "terms:", "constants:", "hypotheses:", "model cli-heat 7"):
        assert text in r.out
    r = run("show", stored.certificate_id, "--json")
    assert r.json()["id"] == stored.certificate_id
    r = run("list", "--model", "cli-heat", "--version", "7")
    assert r.code == 0 and stored.certificate_id in r.out
    r = run("list", "--model", "cli-heat", "--json")
    assert stored.certificate_id in [i["id"] for i in r.json()["items"]]
    r = run("list", "--model", "nobody")
    assert r.code == 0 and "no certificates" in r.out


def test_show_unknown_id_exits_1(run: Runner) -> None:
    r = run("show", "crt_nope")
    assert r.code == 1 and "certificate_not_found" in r.err


def test_list_usage_errors(run: Runner) -> None:
    assert run("list", "--version", "3").code == 2
    assert run("list", "--limit", "0").code == 2


def _report_handler(
    status: int, code: str | None = None
) -> Callable[[httpx.Request], httpx.Response]:
    def handler(request: httpx.Request) -> httpx.Response:
        if status == 200:
            return httpx.Response(
                200, text="<h1>certificate crt_1</h1>", headers={"content-type": "text/html"}
            )
        return httpx.Response(
            status, json={"title": "t", "status": status, "detail": "d", "code": code}
        )

    return handler


def test_report_not_available_is_said_plainly(run_scripted: Callable[..., Result]) -> None:
    r = run_scripted(_report_handler(404, "not_found"), "report", "crt_1")
    assert r.code == 1
    assert "reports are not available on this service" in r.err
    r = run_scripted(_report_handler(404, "not_found"), "report", "crt_1", "--json")
    assert r.json()["available"] is False
    r = run_scripted(_report_handler(404, "certificate_not_found"), "report", "crt_1")
    assert r.code == 1 and "certificate_not_found" in r.err


def test_report_is_printed_or_saved(run_scripted: Callable[..., Result], tmp_path: Path) -> None:
    r = run_scripted(_report_handler(200), "report", "crt_1")
    assert r.code == 0 and "<h1>certificate crt_1</h1>" in r.out
    out = tmp_path / "report.html"
    r = run_scripted(_report_handler(200), "report", "crt_1", "-o", str(out))
    assert r.code == 0 and out.read_text() == "<h1>certificate crt_1</h1>"


def test_internal_error_exits_3(run_scripted: Callable[..., Result]) -> None:
    def boom(request: httpx.Request) -> httpx.Response:
        return httpx.Response(
            500,
            json={
                "title": "t",
                "status": 500,
                "code": "internal_error",
                "detail": "an internal error",
                "request_id": "r9",
            },
        )

    r = run_scripted(boom, "show", "crt_1")
    assert r.code == 3 and "request id: r9" in r.err


def test_unreachable_service_exits_3(capsys: pytest.CaptureFixture[str]) -> None:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    code = main(["list", "--url", f"http://127.0.0.1:{port}", "--retries", "0", "--json"])
    captured = capsys.readouterr()
    assert code == 3
    assert json.loads(captured.out)["error"]["code"] == "unreachable"
    assert "cannot reach the service" in captured.err


def test_bad_url_is_a_usage_error(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["list", "--url", "localhost:8000"]) == 2
    assert "http://" in capsys.readouterr().err


def test_progress_bar_draws_to_its_stream() -> None:
    stream = io.StringIO()
    bar = ProgressBar("uploading", stream=stream, enabled=True, min_interval=0)
    for done in (0, 500_000, 1_000_000):
        bar(done, 1_000_000)
    text = stream.getvalue()
    assert "\ruploading [" in text and "100%" in text and "1.0 MB/1.0 MB" in text
    assert text.endswith("\n")
    quiet = io.StringIO()
    ProgressBar("x", stream=quiet)(1, 2)  # not a terminal: silent
    assert quiet.getvalue() == ""
    items = io.StringIO()
    ProgressBar("batches", unit="items", stream=items, enabled=True)(3, 4)
    assert "3/4" in items.getvalue()


def test_report_page_from_the_app(run: Runner, stored: Stored, tmp_path: Path) -> None:
    out = tmp_path / "page.html"
    r = run("report", stored.certificate_id, "-o", str(out), "--json")
    assert r.code == 0, r.err
    assert r.json() == {
        "available": True,
        "certificate_id": stored.certificate_id,
        "media_type": "text/html",
        "output": str(out),
    }
    assert stored.certificate_id in out.read_text()
