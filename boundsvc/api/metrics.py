"""Prometheus metrics: ``GET /metrics`` in the text exposition format.

* ``boundsvc_http_requests_total{method,route,status}`` and
  ``boundsvc_http_request_duration_seconds{method,route,status}`` (histogram): ``route`` is
  the route *template* (``/v1/certificates/{certificate_id}``), ``unmatched`` for 404s, so
  the label set stays bounded.
* ``boundsvc_certificates{status,family}``: stored certificates, counted by
  :meth:`~boundsvc.store.Store.count_certificates_by` at scrape time, so the value is the
  database's, whichever worker answers.  ``boundsvc_store_up`` is 0 when that count failed.

Several workers: request metrics live in each process.  With the environment variable
``PROMETHEUS_MULTIPROC_DIR`` set (to an empty directory, before the processes start)
prometheus_client writes them to memory-mapped files there and every scrape sums all
workers' files; without it a scrape shows only the worker that answered it.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Iterable

from fastapi import APIRouter, Request
from prometheus_client import (
    CONTENT_TYPE_LATEST,
    CollectorRegistry,
    Counter,
    Histogram,
    generate_latest,
)
from prometheus_client.core import GaugeMetricFamily, Metric
from prometheus_client.registry import Collector
from starlette.responses import Response

from boundsvc.store import Store, StoreError

__all__ = ["MULTIPROC_ENV", "CertificateCollector", "Metrics", "metrics_router"]

log = logging.getLogger("boundsvc.api.metrics")

MULTIPROC_ENV = "PROMETHEUS_MULTIPROC_DIR"
#: Latency buckets (seconds): certification with symbolic work can take seconds.
LATENCY_BUCKETS = (0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0, 60.0)


class CertificateCollector(Collector):
    """Counts stored certificates by (status, family) when scraped."""

    def __init__(self, store: Store) -> None:
        self.store = store

    def collect(self) -> Iterable[Metric]:
        """Query the store; report ``boundsvc_store_up 0`` instead of failing the scrape."""
        certificates = GaugeMetricFamily(
            "boundsvc_certificates",
            "Stored certificates by status and family.",
            labels=["status", "family"],
        )
        up = GaugeMetricFamily(
            "boundsvc_store_up", "1 if the certificate counts could be read from the database."
        )
        try:
            counts = self.store.count_certificates_by()
        except StoreError as exc:
            log.warning("metrics: cannot count certificates: %s", exc)
            up.add_metric([], 0.0)
            return [up]
        for row in counts:
            certificates.add_metric([row.status, row.family], float(row.count))
        up.add_metric([], 1.0)
        return [certificates, up]


class Metrics:
    """The request metrics of one app and the registry a scrape renders."""

    def __init__(self, store: Store) -> None:
        self.multiprocess_dir = os.environ.get(MULTIPROC_ENV) or None
        if self.multiprocess_dir:
            os.makedirs(self.multiprocess_dir, exist_ok=True)
        self.registry = CollectorRegistry()
        self.requests = Counter(
            "boundsvc_http_requests",
            "HTTP requests by route template and status.",
            ["method", "route", "status"],
            registry=self.registry,
        )
        self.latency = Histogram(
            "boundsvc_http_request_duration_seconds",
            "HTTP request latency by route template and status.",
            ["method", "route", "status"],
            buckets=LATENCY_BUCKETS,
            registry=self.registry,
        )
        self.certificates = CertificateCollector(store)
        if not self.multiprocess_dir:
            self.registry.register(self.certificates)

    def observe(self, method: str, route: str, status: int, seconds: float) -> None:
        """Record one finished request."""
        labels = (method, route, str(status))
        self.requests.labels(*labels).inc()
        self.latency.labels(*labels).observe(seconds)

    def render(self) -> bytes:
        """The text exposition of every metric (all workers' in multiprocess mode)."""
        if not self.multiprocess_dir:
            return generate_latest(self.registry)
        from prometheus_client import multiprocess

        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry, path=self.multiprocess_dir)
        registry.register(self.certificates)
        return generate_latest(registry)


metrics_router = APIRouter(tags=["service"])


@metrics_router.get(
    "/metrics", response_class=Response, responses={200: {"content": {CONTENT_TYPE_LATEST: {}}}}
)
def metrics(request: Request) -> Response:
    """Prometheus metrics (needs the ``admin`` scope when API keys are configured)."""
    collected: Metrics = request.app.state.metrics
    return Response(collected.render(), media_type=CONTENT_TYPE_LATEST)
