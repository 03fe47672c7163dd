"""Bounded load on a real two-worker ``boundsvc serve``: zero errors, nothing lost, memory
steady.  The long form (2,000 certificates from 16 clients, 10,000 requests for memory) is
``make soak`` (tools/soak.py); its measured figures are in docs/reliability.md.

Sizes come from the environment so that ``make soak`` can scale them:
``BOUNDSVC_LOAD_CERTIFICATES`` (default 12), ``BOUNDSVC_LOAD_CLIENTS`` (8),
``BOUNDSVC_LOAD_VALUES`` (1e4 interior residual values per certificate, base64),
``BOUNDSVC_LOAD_REQUESTS`` (400 requests of the memory run, one POST in twenty).

Memory: the resident set of the whole server process tree (supervisor, two workers, their
symbolic sandbox processes; ``VmRSS``) sampled during the run. Over the second half the
growth must stay under ``LATE_MARGIN_MIB`` (a leak keeps growing there; the allocator's
warm-up plateau, 13-20 MiB in the first samples of a fresh environment, does not), and over
the whole run under ``MARGIN_MIB``. The bounded run detects only gross leaks (a retained
residual array per certificate POST); the long form in ``make soak`` (10,000 requests)
is the sensitive one.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest

from tools.soak import ServeProcess, Workload, listed_ids, memory_run, post_certificates

pytestmark = [pytest.mark.subprocess, pytest.mark.slow]

CERTIFICATES = int(os.environ.get("BOUNDSVC_LOAD_CERTIFICATES", "12"))
CLIENTS = int(os.environ.get("BOUNDSVC_LOAD_CLIENTS", "8"))
VALUES = int(os.environ.get("BOUNDSVC_LOAD_VALUES", "10000"))
REQUESTS = int(os.environ.get("BOUNDSVC_LOAD_REQUESTS", "400"))
MARGIN_MIB = 48.0
LATE_MARGIN_MIB = 12.0


@pytest.fixture
def server(tmp_path: Path) -> Iterator[ServeProcess]:
    url = f"sqlite:///{tmp_path / 'load.sqlite3'}"
    with ServeProcess(url, workers=2, log_path=tmp_path / "server.log") as running:
        yield running


def test_concurrent_certificates_zero_errors_nothing_lost_memory_steady(
    server: ServeProcess,
) -> None:
    with httpx.Client(base_url=server.base_url, timeout=120) as client:
        workload = Workload.prepare(client, VALUES)
        assert workload.sizes["interior"] >= VALUES
        # warm-up: both workers load their caches and start their sandbox workers
        warm = post_certificates(server.base_url, workload, 4, 2, seed0=10**6)
        assert warm.errors == []

        load = post_certificates(server.base_url, workload, CERTIFICATES, CLIENTS)
        assert load.errors == [], load.errors[:3]
        assert len(load.ids) == CERTIFICATES  # distinct inputs, distinct certificates
        stored = listed_ids(client)
        assert len(stored) == len(set(stored)) == CERTIFICATES + 4
        assert load.ids <= set(stored)
        print("load", load.summary())  # visible with -s

        memory, trace = memory_run(
            server,
            workload,
            REQUESTS,
            CLIENTS,
            stored,
            every=REQUESTS // 8,
            seed0=10**7,
            post_every=20,
        )
        assert memory.errors == [], memory.errors[:3]
        assert len(trace.samples_mib) >= 8
        assert trace.baseline > 50  # really the server tree (Python + numpy + sympy)
        print("memory", trace.samples_mib)
        # no trend over the second half (a leak), and the whole run within a looser bound
        # that also holds the allocator's warm-up plateau of a fresh environment
        assert trace.late_growth <= LATE_MARGIN_MIB, trace.samples_mib
        assert trace.growth <= MARGIN_MIB, trace.samples_mib
        assert len(listed_ids(client)) == CERTIFICATES + 4 + len(memory.ids)
