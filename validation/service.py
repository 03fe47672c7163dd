"""Talking to boundsvc: a running service (subprocess) or an in-process app, one interface.

:class:`ClientApi` uses the project's Python client :class:`boundsvc.client.BoundsvcClient`;
:class:`RawApi` posts JSON with any object that has ``post(url, json=...)`` returning an httpx
response (an ``httpx.Client`` or the in-process test client of ``tests/inprocess.py``).
"""

from __future__ import annotations

import contextlib
import os
import socket
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any, Protocol

import httpx
import numpy as np

REPO = Path(__file__).resolve().parent.parent


class ServiceError(RuntimeError):
    """A request the service refused (the problem-details body is in the message)."""


class Api(Protocol):
    def problem(self, problem: Mapping[str, Any]) -> dict[str, Any]: ...
    def plan(
        self,
        problem_id: str,
        points: Mapping[str, int],
        optional: Sequence[str] = (),
        panels: Mapping[str, int] | None = None,
    ) -> dict[str, Any]: ...
    def certify(
        self,
        problem_id: str,
        plan_id: str,
        regularity: Mapping[str, float | str],
        residuals: Mapping[str, np.ndarray],
        model: Mapping[str, Any],
    ) -> dict[str, Any]: ...
    def study(self, body: Mapping[str, Any]) -> dict[str, Any] | None: ...


def _encode(residuals: Mapping[str, np.ndarray]) -> dict[str, Any]:
    from boundsvc.client import encode_residuals

    return encode_residuals(residuals)


class RawApi:
    """JSON over any ``post(url, json=...)`` client."""

    def __init__(self, http: Any) -> None:
        self.http = http

    def _post(self, path: str, body: Mapping[str, Any], ok: tuple[int, ...]) -> dict[str, Any]:
        r = self.http.post(path, json=dict(body))
        if r.status_code not in ok:
            raise ServiceError(f"POST {path}: {r.status_code} {r.text[:2000]}")
        out: dict[str, Any] = r.json()
        return out

    def problem(self, problem: Mapping[str, Any]) -> dict[str, Any]:
        return self._post("/v1/problems", {"problem": problem}, (200, 201))

    def plan(
        self,
        problem_id: str,
        points: Mapping[str, int],
        optional: Sequence[str] = (),
        panels: Mapping[str, int] | None = None,
    ) -> dict[str, Any]:
        body: dict[str, Any] = {
            "problem_id": problem_id,
            "rule": "gauss-legendre",
            "points": dict(points),
        }
        if panels:
            body["panels"] = dict(panels)
        if optional:
            body["optional_components"] = list(optional)
        return self._post("/v1/plans", body, (200, 201))

    def certify(
        self,
        problem_id: str,
        plan_id: str,
        regularity: Mapping[str, float | str],
        residuals: Mapping[str, np.ndarray],
        model: Mapping[str, Any],
    ) -> dict[str, Any]:
        body = {
            "problem_id": problem_id,
            "plan_id": plan_id,
            "regularity": dict(regularity),
            "residuals": _encode(residuals),
            "model": dict(model),
        }
        return self._post("/v1/certificates", body, (201,))

    def study(self, body: Mapping[str, Any]) -> dict[str, Any] | None:
        r = self.http.post("/v1/studies", json=dict(body))
        if r.status_code in (404, 405):
            return None
        if r.status_code not in (200, 201):
            raise ServiceError(f"POST /v1/studies: {r.status_code} {r.text[:2000]}")
        out: dict[str, Any] = r.json()
        return out


class ClientApi:
    """The same calls through :class:`boundsvc.client.BoundsvcClient`."""

    def __init__(self, base_url: str) -> None:
        from boundsvc.client import BoundsvcClient

        self.client = BoundsvcClient(base_url, timeout=300.0)
        self.raw = RawApi(httpx.Client(base_url=base_url, timeout=300.0))

    def close(self) -> None:
        self.client.close()
        self.raw.http.close()

    def problem(self, problem: Mapping[str, Any]) -> dict[str, Any]:
        out: dict[str, Any] = self.client.problem(dict(problem)).model_dump(mode="json")
        return out

    def plan(
        self,
        problem_id: str,
        points: Mapping[str, int],
        optional: Sequence[str] = (),
        panels: Mapping[str, int] | None = None,
    ) -> dict[str, Any]:
        if optional:  # the client's plan() has no optional components: plain JSON
            return self.raw.plan(problem_id, points, optional, panels)
        out: dict[str, Any] = (
            self.client.plan(problem_id, points=dict(points), panels=panels)
            .to_response()
            .model_dump(mode="json")
        )
        return out

    def certify(
        self,
        problem_id: str,
        plan_id: str,
        regularity: Mapping[str, float | str],
        residuals: Mapping[str, np.ndarray],
        model: Mapping[str, Any],
    ) -> dict[str, Any]:
        cert = self.client.certify(
            problem_id, plan_id, dict(regularity), dict(residuals), model=dict(model)
        )
        out: dict[str, Any] = cert.model_dump(mode="json")
        return out

    def study(self, body: Mapping[str, Any]) -> dict[str, Any] | None:
        return self.raw.study(body)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@contextlib.contextmanager
def running_service() -> Iterator[str]:
    """``python -m boundsvc.cli serve`` on a free loopback port with a temporary SQLite db."""
    with tempfile.TemporaryDirectory(prefix="boundsvc-validation-") as tmp:
        port = _free_port()
        env = dict(os.environ, OPENBLAS_NUM_THREADS="1", BOUNDSVC_LOG_LEVEL="warning")
        proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "boundsvc.cli",
                "serve",
                "--host",
                "127.0.0.1",
                "--port",
                str(port),
                "--database-url",
                f"sqlite:///{Path(tmp) / 'validation.sqlite3'}",
                "--log-level",
                "warning",
            ],
            env=env,
            cwd=REPO,
            stdout=subprocess.DEVNULL,
        )
        url = f"http://127.0.0.1:{port}"
        try:
            deadline = time.monotonic() + 60
            while True:
                try:
                    if httpx.get(f"{url}/v1/health", timeout=1.0).status_code == 200:
                        break
                except httpx.TransportError:
                    pass
                if proc.poll() is not None or time.monotonic() > deadline:
                    raise RuntimeError("the service did not start")
                time.sleep(0.2)
            yield url
        finally:
            proc.terminate()
            try:
                proc.wait(timeout=15)
            except subprocess.TimeoutExpired:  # pragma: no cover
                proc.kill()
                proc.wait()


def connect(base_url: str) -> ClientApi | RawApi:
    """The client-library API if it works against ``base_url``, else raw httpx."""
    try:
        api = ClientApi(base_url)
        api.client.health()
        return api
    except Exception as exc:
        print(f"boundsvc.client unusable ({exc!r}); using httpx directly", file=sys.stderr)
        return RawApi(httpx.Client(base_url=base_url, timeout=300.0))
