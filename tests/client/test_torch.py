"""PyTorch adapter: autograd derivatives against closed forms and against the numpy MLP.

Acceptance: residuals of a module with a known closed form agree with the closed-form
residuals to 1e-10 (float64), and the numpy MLP's Taylor-mode derivatives agree with autograd
on the same weights. Skipped (with the reason) when PyTorch is not installed.
"""

from __future__ import annotations

import importlib
import itertools
import sys

import numpy as np
import pytest

torch = pytest.importorskip(
    "torch", reason="PyTorch is not installed (pip install 'boundsvc[torch]')"
)

from boundsvc.client.adapters import PlanEvaluator  # noqa: E402
from boundsvc.client.mlp import MLP, residual_fields  # noqa: E402
from boundsvc.client.torch import TorchFields, require_torch, torch_plan_evaluator  # noqa: E402
from tests.client.test_adapters import HEAT, K, make_plan  # noqa: E402

TOL = 1e-10


class Closed(torch.nn.Module):  # type: ignore[misc]
    """u(t, x) = exp(-a t) sin(pi x) + b x^3 t^2, with trainable a and b."""

    def __init__(self) -> None:
        super().__init__()
        self.a = torch.nn.Parameter(torch.tensor(0.7, dtype=torch.float64))
        self.b = torch.nn.Parameter(torch.tensor(0.3, dtype=torch.float64))

    def forward(self, z: torch.Tensor) -> torch.Tensor:
        t, x = z[:, 0], z[:, 1]
        return torch.exp(-self.a * t) * torch.sin(torch.pi * x) + self.b * x**3 * t**2


def closed_form(t: np.ndarray, x: np.ndarray) -> dict[str, np.ndarray]:
    a, b, p = 0.7, 0.3, np.pi
    e, s, c = np.exp(-a * t), np.sin(p * x), np.cos(p * x)
    return {
        "u": e * s + b * x**3 * t**2,
        "u_t": -a * e * s + 2 * b * x**3 * t,
        "u_x": p * e * c + 3 * b * x**2 * t**2,
        "u_xx": -(p**2) * e * s + 6 * b * x * t**2,
        "u_tx": -a * p * e * c + 6 * b * x**2 * t,
        "u_tt": a**2 * e * s + 2 * b * x**3,
        "u_xxx": -(p**3) * e * c + 6 * b * t**2,
        "u_txx": a * p**2 * e * s + 12 * b * x * t,
    }


def points(n: int = 200, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.column_stack([rng.uniform(0, 0.5, n), rng.uniform(0, 1, n)])


def test_derivatives_match_the_closed_form() -> None:
    pts = points()
    names = list(closed_form(pts[:, 0], pts[:, 1]))
    got = TorchFields(Closed())(pts, names)
    want = closed_form(pts[:, 0], pts[:, 1])
    for name in names:
        assert got[name].dtype == np.float64
        np.testing.assert_allclose(got[name], want[name], rtol=0, atol=TOL, err_msg=name)


def test_residuals_match_closed_form_residuals() -> None:
    """The PDE residual u_t - k u_xx and the initial/boundary residuals, on a plan."""
    plan = make_plan(n=10)
    ev = torch_plan_evaluator(Closed(), HEAT)
    res = ev.residuals(
        plan,
        lambda f: f["u_t"] - K * f["u_xx"],
        names=("u_t", "u_xx"),
        initial_value=lambda x: np.sin(np.pi * x),
        boundary_value=lambda t, x: np.zeros_like(x),
    )
    pi = plan["interior"].points
    f = closed_form(pi[:, 0], pi[:, 1])
    np.testing.assert_allclose(res["interior"], f["u_t"] - K * f["u_xx"], rtol=0, atol=TOL)
    x0 = plan["initial"].column("x")
    np.testing.assert_allclose(
        res["initial"], closed_form(0 * x0, x0)["u"] - np.sin(np.pi * x0), rtol=0, atol=TOL
    )
    pb = plan["boundary"].points
    np.testing.assert_allclose(
        res["boundary"], closed_form(pb[:, 0], pb[:, 1])["u"], rtol=0, atol=TOL
    )


def torch_twin(net: MLP) -> torch.nn.Module:
    """The same network in torch: input scaling, Linear layers, tanh."""
    layers: list[torch.nn.Module] = []
    for i, (w, b) in enumerate(zip(net.weights, net.biases, strict=True)):
        lin = torch.nn.Linear(w.shape[1], w.shape[0]).double()
        with torch.no_grad():
            lin.weight.copy_(torch.tensor(w))
            lin.bias.copy_(torch.tensor(b))
        layers.append(lin)
        if i < len(net.weights) - 1:
            layers.append(torch.nn.Tanh())
    body = torch.nn.Sequential(*layers)
    shift = torch.tensor(net.in_shift)
    scale = torch.tensor(net.in_scale)

    class Twin(torch.nn.Module):  # type: ignore[misc]
        def __init__(self) -> None:
            super().__init__()
            self.body = body

        def forward(self, z: torch.Tensor) -> torch.Tensor:
            return self.body((z - shift) / scale)

    return Twin()


def test_numpy_mlp_agrees_with_autograd_on_the_same_weights() -> None:
    rng = np.random.default_rng(11)
    widths = (2, 12, 12, 1)
    ws = [rng.normal(scale=0.8, size=(b, a)) for a, b in itertools.pairwise(widths)]
    bs = [rng.normal(scale=0.5, size=b) for b in widths[1:]]
    net = MLP.from_arrays(ws, bs, input_scaling=(np.array([0.25, 0.5]), np.array([0.25, 0.5])))
    pts = points(300, seed=5)
    names = ["u", "u_t", "u_x", "u_xx", "u_tx", "u_tt", "u_txx"]
    mine = residual_fields(net, pts, ("t", "x"), names)
    auto = TorchFields(torch_twin(net), batch_size=64)(pts, names)
    for name in names:
        np.testing.assert_allclose(mine[name], auto[name], rtol=0, atol=TOL, err_msg=name)


def test_batches_give_the_same_numbers_and_report_progress() -> None:
    pts = points(101)
    seen: list[tuple[int, int]] = []
    small = TorchFields(Closed(), batch_size=10, progress=lambda a, b: seen.append((a, b)))(
        pts, ["u_xx", "u_tx"]
    )
    whole = TorchFields(Closed(), batch_size=1000)(pts, ["u_xx", "u_tx"])
    for name in ("u_xx", "u_tx"):
        np.testing.assert_array_equal(small[name], whole[name])
    assert len(seen) == 11 and seen[-1] == (101, 101)


def test_several_outputs_and_vanishing_derivatives() -> None:
    class Pair(torch.nn.Module):  # type: ignore[misc]
        def forward(self, z: torch.Tensor) -> torch.Tensor:
            return torch.stack([2 * z[:, 1] + z[:, 0], z[:, 0] * z[:, 1] ** 2], dim=1)

    pts = points(20)
    f = TorchFields(Pair(), outputs=("u", "v"))(pts, ["u_xx", "u_x", "v_x", "v_txx"])
    assert np.all(f["u_xx"] == 0.0) and np.all(f["u_x"] == 2.0)
    np.testing.assert_allclose(f["v_x"], 2 * pts[:, 0] * pts[:, 1], rtol=0, atol=TOL)
    np.testing.assert_allclose(f["v_txx"], 2.0, rtol=0, atol=TOL)


def test_float32_modules_run_in_their_precision_and_return_float64() -> None:
    net = torch.nn.Sequential(torch.nn.Linear(2, 4), torch.nn.Tanh(), torch.nn.Linear(4, 1))
    fields = TorchFields(net)
    assert fields.dtype == torch.float32
    out = fields(points(5), ["u", "u_x"])
    assert out["u"].dtype == np.float64 and out["u"].shape == (5,)


def test_wrong_output_shape_is_explained() -> None:
    net = torch.nn.Linear(2, 3).double()
    with pytest.raises(ValueError, match=r"returned shape \(4, 3\).*outputs \['u'\]"):
        TorchFields(net)(points(4), ["u"])


@pytest.mark.skipif(not torch.cuda.is_available(), reason="no CUDA device")
def test_model_on_a_gpu() -> None:  # pragma: no cover - needs a GPU
    module = Closed().to("cuda")
    pts = points(50)
    got = TorchFields(module)(pts, ["u_xx"])
    np.testing.assert_allclose(
        got["u_xx"], closed_form(pts[:, 0], pts[:, 1])["u_xx"], rtol=0, atol=TOL
    )


def test_missing_torch_gives_an_install_hint(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "torch", None)  # makes `import torch` fail
    with pytest.raises(ImportError, match=r"pip install 'boundsvc\[torch\]'"):
        require_torch()
    module = importlib.import_module("boundsvc.client.torch")  # importing it stays fine
    with pytest.raises(ImportError, match="needs PyTorch"):
        module.TorchFields(object())


def test_plan_evaluator_accepts_torch_fields() -> None:
    ev = PlanEvaluator(TorchFields(Closed()), t0=0.0)
    assert ev.sup_abs("u", np.array([[0.0, 0.5]])) == pytest.approx(1.0, abs=1e-12)
