"""The app over a temporary SQLite store, driven through HTTP in this process, and a set of
certificates with known true errors (``tests/reports/seed.py``) shared by a module's tests."""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import httpx
import pytest

from tests.cli.inprocess import BASE_URL, SyncASGITransport, build_test_app
from tests.reports.seed import heat_certificate, vacuous_certificate

EPS = (1e-3, 4e-3, 1.6e-2, 6.4e-2)


@dataclass
class Seeded:
    """An in-process app with heat certificates at several eps and one vacuous certificate."""

    http: httpx.Client
    app: Any
    heat: list[dict[str, Any]]
    errors: list[float]
    vacuous: dict[str, Any]

    def post(self, path: str, body: dict[str, Any], **kwargs: Any) -> Any:
        response = self.http.post(path, json=body, **kwargs)
        assert response.status_code in (200, 201), response.text
        return response.json()


@pytest.fixture(scope="module")
def seeded(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Seeded]:
    app = build_test_app(tmp_path_factory.mktemp("reports"))
    transport = SyncASGITransport(app)
    with httpx.Client(transport=transport, base_url=BASE_URL, timeout=60) as http:
        s = Seeded(http=http, app=app, heat=[], errors=[], vacuous={})
        for epoch, eps in enumerate(EPS, start=1):
            doc, err = heat_certificate(
                s.post, eps, model={"name": "heat-mlp", "version": f"v{epoch}", "epoch": 50 * epoch}
            )
            s.heat.append(doc)
            s.errors.append(err)
        s.vacuous = vacuous_certificate(s.post, model={"name": "burgers-net", "version": "1"})
        yield s
    transport.close()
