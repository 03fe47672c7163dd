"""Bounded symbolic work: a derivation that would take minutes is refused, the service stays
responsive meanwhile, and ordinary problems go through."""

from __future__ import annotations

import threading
from collections.abc import Iterator
from pathlib import Path

import pytest

from boundsvc.api import build_app
from boundsvc.settings import Settings
from boundsvc.store import open_store
from tests.inprocess import InProcessClient

# sympy expands this for minutes: (4 terms)^20 * (3 terms)^20 (measured: > 120 s in-process)
SLOW = {
    "equation": "u_t = u_xx + (u + x + t + 1)^20*(u - x + 2)^20",
    "space": {"x": [0.0, 1.0]},
    "time": [0.0, 1.0],
}


@pytest.fixture
def client(tmp_path: Path) -> Iterator[InProcessClient]:
    store = open_store(f"sqlite:///{tmp_path}/s.sqlite3")
    c = InProcessClient(
        build_app(Settings(database_url="unused", symbolic_budget_seconds=2.0), store)
    )
    yield c
    c.close()
    store.dispose()


def test_too_much_symbolic_work_is_refused_while_the_service_answers(
    client: InProcessClient,
) -> None:
    result: dict[str, object] = {}

    def slow() -> None:
        result["response"] = client.post("/v1/problems", json={"problem": SLOW})

    worker = threading.Thread(target=slow)
    worker.start()
    health = client.get("/v1/health")
    assert health.status_code == 200
    assert worker.is_alive(), "the slow derivation should still be running"
    worker.join(timeout=60)
    response = result["response"]
    assert response.status_code == 422  # type: ignore[attr-defined]
    assert response.json()["code"] == "problem_too_complex"  # type: ignore[attr-defined]
    ok = client.post(
        "/v1/problems",
        json={
            "problem": {"equation": "u_t = 3*u_xx", "space": {"x": [0.0, 1.0]}, "time": [0.0, 1.0]}
        },
    )
    assert ok.status_code == 200, ok.text
