"""Fixtures: the real app in process, problem/regularity/residual files, and a CLI runner."""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest

from boundsvc.cli import _common, main
from boundsvc.client import BoundsvcClient, Plan, RetryPolicy
from tests.cli.inprocess import build_test_app, client_of
from tests.client.test_adapters import HEAT
from tests.client.test_roundtrip import REGULARITY, residuals


@dataclass
class Result:
    code: int
    out: str
    err: str

    def json(self) -> Any:
        return json.loads(self.out)


Runner = Callable[..., Result]


@pytest.fixture(scope="session")
def app(tmp_path_factory: pytest.TempPathFactory) -> Any:
    return build_test_app(tmp_path_factory.mktemp("cli-app"))


@pytest.fixture
def run(app: Any, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> Runner:
    """``run("show", "crt_...")``: the CLI against the in-process app."""
    monkeypatch.setattr(_common, "CLIENT_FACTORY", lambda args: client_of(app))

    def runner(*argv: str) -> Result:
        capsys.readouterr()
        code = main(list(argv))
        captured = capsys.readouterr()
        return Result(code, captured.out, captured.err)

    return runner


@pytest.fixture
def run_scripted(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> Callable[..., Result]:
    """``run_scripted(handler, "gate", ...)``: the CLI against a MockTransport handler."""

    def runner(handler: Callable[[httpx.Request], httpx.Response], *argv: str) -> Result:
        monkeypatch.setattr(
            _common,
            "CLIENT_FACTORY",
            lambda args: BoundsvcClient(
                "http://svc.test",
                transport=httpx.MockTransport(handler),
                retries=RetryPolicy(max_retries=0),
            ),
        )
        capsys.readouterr()
        code = main(list(argv))
        captured = capsys.readouterr()
        return Result(code, captured.out, captured.err)

    return runner


@pytest.fixture
def files(tmp_path: Path) -> dict[str, Path]:
    problem = tmp_path / "problem.json"
    problem.write_text(json.dumps(HEAT))
    regularity = tmp_path / "regularity.json"
    regularity.write_text(json.dumps(REGULARITY))
    return {"problem": problem, "regularity": regularity, "dir": tmp_path}


@dataclass
class Stored:
    plan: Plan
    certificate_id: str
    model: str
    version: str


@pytest.fixture(scope="session")
def stored(app: Any) -> Iterator[Stored]:
    """One certificate in the app, for model ``cli-heat`` version ``7``."""
    with client_of(app) as client:
        plan = client.plan(HEAT, points={"t": 8, "x": 8})
        cert = client.certify(
            HEAT,
            plan,
            REGULARITY,
            residuals(plan),
            model={"name": "cli-heat", "version": "7", "epoch": 100},
        )
    assert cert.status == "valid" and cert.bound.l2_space_time is not None
    assert math.isfinite(cert.bound.l2_space_time)
    yield Stored(plan, cert.id, "cli-heat", "7")


def write_residuals(path: Path, plan: Plan) -> Path:
    np.savez(path, **residuals(plan))
    return path
