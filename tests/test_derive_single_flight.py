"""Concurrent requests for the same new problem share one derivation (single flight).

Before this, every concurrent request took a symbolic worker for the same problem; with more
requests than workers the extra ones were refused with 503 ``service_busy`` although one
derivation would have served them all (seen under the bounded load test with two server
processes, each with its own cache).
"""

from __future__ import annotations

import threading
import time
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import pytest

import boundsvc.sandbox as sandbox_module
from api_schemas import ProblemSpec
from boundsvc import certify
from boundsvc.sandbox import ServiceBusy


class OneWorker:
    """A pool of one symbolic worker: a second concurrent check is refused, as when busy."""

    def __init__(self) -> None:
        self.checks = 0
        self._busy = threading.Lock()

    def check(self, problem: Any, budget: float) -> None:
        if not self._busy.acquire(blocking=False):
            raise ServiceBusy("service_busy", "every symbolic worker is busy", "problem")
        try:
            self.checks += 1
            time.sleep(0.2)
        finally:
            self._busy.release()


def test_one_derivation_serves_every_concurrent_request(monkeypatch: pytest.MonkeyPatch) -> None:
    pool = OneWorker()
    monkeypatch.setattr(sandbox_module, "sandbox", lambda: pool)
    spec = ProblemSpec.model_validate(
        {
            "equation": "u_t = 0.3173*u_xx",  # a coefficient no other test uses: not cached
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, 1.0],
        }
    )
    with ThreadPoolExecutor(8) as ex:
        results = list(ex.map(lambda _: certify.derive(spec, budget_seconds=5.0), range(8)))
    assert pool.checks == 1
    assert all(r is results[0] for r in results)
    assert results[0].family.id == "linear-advection-diffusion-reaction"
    assert not certify._INFLIGHT  # nothing left behind
