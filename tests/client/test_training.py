"""``CertifyEvery`` in a real training loop against the real app (in process), and through
outages.

The PINN learns the heat equation ``u_t = 0.4 u_xx`` on ``[0, 1] x [0, 0.5]`` with
``u0 = sin(pi x)`` and ``u = 0`` on the ends, whose solution ``exp(-0.4 pi^2 t) sin(pi x)``
(Strauss, *PDEs*, 2nd ed., ch. 4) gives the regularity bound ``sup |u_x| = pi exp(-0.4 pi^2 t)``.
"""

from __future__ import annotations

import logging
import math
import socket
from collections.abc import Iterator
from typing import Any

import httpx
import numpy as np
import pytest

from boundsvc.client import BoundsvcClient, CertifyEvery, RetryPolicy, ServiceUnavailable
from tests.cli.inprocess import BASE_URL, SyncASGITransport, build_test_app, client_of
from tests.client.test_adapters import HEAT, K

torch = pytest.importorskip(
    "torch", reason="PyTorch is not installed (pip install 'boundsvc[torch]')"
)

from boundsvc.client.torch import torch_plan_evaluator  # noqa: E402

EXACT_UX = "pi*exp(-0.4*pi^2*t)"


@pytest.fixture(scope="module")
def app(tmp_path_factory: pytest.TempPathFactory) -> Any:
    return build_test_app(tmp_path_factory.mktemp("training"))


@pytest.fixture
def client(app: Any) -> Iterator[BoundsvcClient]:
    with client_of(app) as c:
        yield c


def make_net() -> Any:
    torch.manual_seed(0)
    return torch.nn.Sequential(
        torch.nn.Linear(2, 16),
        torch.nn.Tanh(),
        torch.nn.Linear(16, 16),
        torch.nn.Tanh(),
        torch.nn.Linear(16, 1),
    ).double()


def pinn_loss(net: Any, interior: Any, x0: Any, tb: Any) -> Any:
    z = interior.clone().requires_grad_(True)
    u = net(z)[:, 0]
    (g,) = torch.autograd.grad(u.sum(), z, create_graph=True)
    (gx,) = torch.autograd.grad(g[:, 1].sum(), z, create_graph=True)
    r = g[:, 0] - K * gx[:, 1]
    u0 = net(torch.stack([torch.zeros_like(x0), x0], 1))[:, 0] - torch.sin(torch.pi * x0)
    ends = torch.cat(
        [torch.stack([tb, torch.zeros_like(tb)], 1), torch.stack([tb, torch.ones_like(tb)], 1)]
    )
    return (r**2).mean() + 10 * (u0**2).mean() + 10 * (net(ends)[:, 0] ** 2).mean()


def heat_certifier(client: BoundsvcClient, net: Any, **kwargs: Any) -> CertifyEvery:
    evaluator = torch_plan_evaluator(net, HEAT)
    edges = np.array([[t, x] for t in np.linspace(0, 0.5, 101) for x in (0.0, 1.0)])

    def regularity() -> dict[str, float | str]:
        # the model's boundary sup |u_x|, sampled, with a 10 % margin (asserted, recorded so)
        return {"sup_abs_u_x": EXACT_UX, "sup_abs_model_u_x": 1.1 * evaluator.sup_abs("u_x", edges)}

    def residual_fn(plan: Any) -> dict[str, np.ndarray]:
        return evaluator.residuals(
            plan,
            lambda f: f["u_t"] - K * f["u_xx"],
            names=("u_t", "u_xx"),
            initial_value=lambda x: np.sin(np.pi * x),
            boundary_value=lambda t, x: 0.0 * x,
        )

    return CertifyEvery(
        client, HEAT, regularity, plan_points={"t": 12, "x": 12}, residual_fn=residual_fn, **kwargs
    )


def test_training_loop_records_an_improving_bound(
    client: BoundsvcClient, caplog: pytest.LogCaptureFixture
) -> None:
    net = make_net()
    gen = torch.Generator().manual_seed(1)
    interior = torch.rand(256, 2, generator=gen, dtype=torch.float64) * torch.tensor(
        [0.5, 1.0], dtype=torch.float64
    )
    x0 = torch.rand(64, generator=gen, dtype=torch.float64)
    tb = torch.rand(32, generator=gen, dtype=torch.float64) * 0.5
    opt = torch.optim.Adam(net.parameters(), lr=1e-2)
    certifier = heat_certifier(client, net, every=100, model_name="heat-pinn", model_version="test")
    caplog.set_level(logging.INFO, logger="boundsvc.client.training")
    for epoch in range(301):
        opt.zero_grad()
        loss = pinn_loss(net, interior, x0, tb)
        loss.backward()
        opt.step()
        certifier(epoch)
    history = certifier.history
    assert [r.epoch for r in history] == [0, 100, 200, 300]
    assert not certifier.misses
    assert all(r.certificate_id and r.terms for r in history)
    first, last = history[0], history[-1]
    assert last.status == "valid"
    assert first.l2_space_time is not None and last.l2_space_time is not None
    assert last.l2_space_time < 0.5 * first.l2_space_time
    best = certifier.best()
    assert best is not None and best.l2_space_time == min(
        r.l2_space_time for r in history if r.status == "valid" and r.l2_space_time
    )
    assert sum("L2 bound" in m for m in caplog.messages) == 4
    assert "epoch" in certifier.table() and last.certificate_id in certifier.table()
    # one plan for the whole history; the registry knows every epoch
    assert certifier.plan is not None
    plan_ids = {
        client.certificate(r.certificate_id).provenance.plan_id for r in history if r.certificate_id
    }
    assert plan_ids == {certifier.plan.plan_id}
    epochs = sorted(s.id for s in client.certificates(model="heat-pinn", version="test"))
    assert len(epochs) == 4


def closed_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def test_outage_is_recorded_not_raised(caplog: pytest.LogCaptureFixture) -> None:
    down = BoundsvcClient(f"http://127.0.0.1:{closed_port()}", retries=0, timeout=2.0)
    certifier = heat_certifier(down, make_net(), every=2)
    with caplog.at_level(logging.WARNING, logger="boundsvc.client.training"):
        for epoch in range(5):
            certifier(epoch)
    assert [r.epoch for r in certifier.history] == [0, 2, 4]
    assert all(r.missed and r.status == "missed" and r.error for r in certifier.history)
    assert certifier.latest is None and certifier.best() is None
    assert len([m for m in caplog.messages if "no certificate" in m]) == 3
    strict = heat_certifier(down, make_net(), every=1, raise_errors=True)
    with pytest.raises(ServiceUnavailable):
        strict(0)
    down.close()


class Flaky(httpx.BaseTransport):
    """503 for the first ``failures`` certificate posts, then the real app."""

    def __init__(self, app: Any, failures: int) -> None:
        self.inner = SyncASGITransport(app)
        self.failures = failures

    def handle_request(self, request: httpx.Request) -> httpx.Response:
        if (
            request.url.path == "/v1/certificates"
            and request.method == "POST"
            and self.failures > 0
        ):
            self.failures -= 1
            return httpx.Response(
                503,
                json={"title": "x", "status": 503, "detail": "busy", "code": "store_unavailable"},
            )
        return self.inner.handle_request(request)

    def close(self) -> None:
        self.inner.close()


def test_a_miss_then_recovery_keeps_the_same_plan(app: Any) -> None:
    transport = Flaky(app, failures=1)
    with BoundsvcClient(
        BASE_URL, transport=transport, retries=RetryPolicy(max_retries=0)
    ) as client:
        net = make_net()
        certifier = heat_certifier(client, net, every=1, model_name="flaky")
        first = certifier(0)
        second = certifier(1)
        assert first is not None and first.missed and "store_unavailable" in (first.error or "")
        assert second is not None and second.status in ("valid", "vacuous")
        assert certifier(2, force=False) is not None
        assert certifier.latest is not None and certifier.latest.epoch == 2
        assert math.isfinite(certifier.latest.seconds)
