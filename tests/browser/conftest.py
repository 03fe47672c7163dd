"""A real ``boundsvc serve`` on a free loopback port and headless Chromium (Debian's package,
driven by Playwright for Python; ``playwright install`` is never needed).

Without Chromium or the playwright package the browser tests are skipped with the reason,
unless ``CI`` is set: in CI they must run, so they fail instead.
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import httpx
import pytest

CHROMIUM = Path(os.environ.get("BOUNDSVC_CHROMIUM", "/usr/bin/chromium"))
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
]
REPO = Path(__file__).resolve().parents[2]


def browser_or_skip() -> Any:
    """The ``playwright.sync_api`` module, or skip (fail under CI) naming what is missing."""
    missing = []
    if not CHROMIUM.is_file():
        missing.append(f"{CHROMIUM} (apt-get install -y chromium)")
    try:
        from playwright import sync_api
    except ImportError:
        missing.append("the playwright package (pip install playwright)")
        sync_api = None
    if missing:
        reason = "browser tests need " + " and ".join(missing)
        if os.environ.get("CI"):
            pytest.fail(f"{reason}; CI is set, so they must run")
        pytest.skip(reason)
    return sync_api


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@dataclass
class Server:
    url: str
    process: subprocess.Popen[bytes]
    log: Path
    token: str | None = None
    seeded: dict[str, Any] = field(default_factory=dict)

    def post(self, path: str, body: dict[str, Any]) -> Any:
        headers = {"Authorization": f"Bearer {self.token}"} if self.token else {}
        r = httpx.post(self.url + path, json=body, headers=headers, timeout=60)
        assert r.status_code in (200, 201), r.text
        return r.json()


def start_server(tmp: Path, *, token: str | None = None) -> Server:
    port = free_port()
    log = tmp / "serve.log"
    env = os.environ | {"OPENBLAS_NUM_THREADS": "1", "PYTHONPATH": str(REPO)}
    env.pop("BOUNDSVC_DATABASE_URL", None)
    with log.open("wb") as out:
        process = subprocess.Popen(
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
                f"sqlite:///{tmp / 'boundsvc.sqlite3'}",
            ],
            stdout=out,
            stderr=subprocess.STDOUT,
            env=env,
            cwd=REPO,
        )
    server = Server(f"http://127.0.0.1:{port}", process, log, token)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise RuntimeError(f"boundsvc serve exited: {log.read_text()[-2000:]}")
        try:
            if httpx.get(server.url + "/v1/health", timeout=1).status_code == 200:
                return server
        except httpx.TransportError:
            pass
        time.sleep(0.2)
    stop_server(server)
    raise RuntimeError(f"boundsvc serve did not answer in 60 s: {log.read_text()[-2000:]}")


def stop_server(server: Server) -> None:
    server.process.terminate()
    try:
        server.process.wait(timeout=15)
    except subprocess.TimeoutExpired:
        server.process.kill()
        server.process.wait(timeout=15)


@pytest.fixture(scope="module")
def sync_api() -> Any:
    return browser_or_skip()


@pytest.fixture(scope="module")
def browser(sync_api: Any) -> Iterator[Any]:
    with sync_api.sync_playwright() as pw:
        chromium = pw.chromium.launch(
            executable_path=str(CHROMIUM), args=CHROMIUM_ARGS, headless=True
        )
        yield chromium
        chromium.close()


class PageWatch:
    """A page that records console errors, page errors and failed requests."""

    def __init__(self, page: Any) -> None:
        self.page = page
        self.problems: list[str] = []
        page.on(
            "console", lambda m: m.type == "error" and self.problems.append(f"console: {m.text}")
        )
        page.on("pageerror", lambda e: self.problems.append(f"pageerror: {e}"))
        page.on("requestfailed", lambda r: self.problems.append(f"failed: {r.url}"))
        page.on(
            "response",
            lambda r: r.status >= 400 and self.problems.append(f"HTTP {r.status}: {r.url}"),
        )

    def images(self) -> list[tuple[str, int]]:
        return [
            (src, int(w))
            for src, w in self.page.evaluate(
                "() => Array.from(document.images).map(i => [i.currentSrc || i.src, "
                "i.complete ? i.naturalWidth : 0])"
            )
        ]


@pytest.fixture
def watch(browser: Any) -> Iterator[PageWatch]:
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    page = context.new_page()
    yield PageWatch(page)
    context.close()
