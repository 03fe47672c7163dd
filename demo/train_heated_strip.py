"""Train the demo PINN for the cooling steel strip (:mod:`demo.scenario`).

Run from the repository root::

    .venv/bin/pip install torch==2.13.0     # CPU build, once
    .venv/bin/python -m demo.train_heated_strip

It writes ``demo/heated_strip_weights.npz`` in the :meth:`boundsvc.client.mlp.MLP.save_npz`
layout.  This is the only module of the project that imports ``torch``; the
demo and the tests only read the shipped weights.

The network is ``(t, x) -> 20 -> 20 -> u`` with ``tanh`` activations and the
inputs mapped onto ``[-1, 1]^2``.  The loss is the physics-informed one of
Raissi, Perdikaris and Karniadakis [1]_: the mean squared PDE residual
``u_t - k u_xx`` on random collocation points plus penalties for the initial and
boundary data.  Training is Adam followed by L-BFGS, float64 on the CPU, seeded.

References
----------
.. [1] M. Raissi, P. Perdikaris and G. E. Karniadakis, "Physics-informed neural
   networks: A deep learning framework for solving forward and inverse problems
   involving nonlinear partial differential equations", *J. Comput. Phys.* 378
   (2019), 686-707.
"""

from __future__ import annotations

import argparse
import itertools
import json
import time
from pathlib import Path
from typing import Any

import numpy as np
import torch
from torch import nn

from boundsvc.client.mlp import MLP
from demo import scenario

DEFAULT_OUT = Path(__file__).resolve().parent / "heated_strip_weights.npz"
HIDDEN = (20, 20)
# Map t in [0, T] and x in [0, 1] onto [-1, 1]: z = (input - shift) / scale.
IN_SHIFT = np.array([scenario.T_END / 2, sum(scenario.X_DOMAIN) / 2])
IN_SCALE = np.array([scenario.T_END / 2, (scenario.X_DOMAIN[1] - scenario.X_DOMAIN[0]) / 2])


class Net(nn.Module):
    """``tanh`` MLP with the fixed input scaling built in."""

    def __init__(self) -> None:
        super().__init__()
        widths = (2, *HIDDEN, 1)
        self.layers = nn.ModuleList(
            nn.Linear(a, b, dtype=torch.float64) for a, b in itertools.pairwise(widths)
        )
        self.register_buffer("shift", torch.tensor(IN_SHIFT))
        self.register_buffer("scale", torch.tensor(IN_SCALE))
        for layer in self.layers:
            nn.init.xavier_normal_(layer.weight)
            nn.init.zeros_(layer.bias)

    def forward(self, tx: torch.Tensor) -> torch.Tensor:
        z = (tx - self.shift) / self.scale
        for layer in self.layers[:-1]:
            z = torch.tanh(layer(z))
        return self.layers[-1](z)[:, 0]


def pde_residual(net: Net, tx: torch.Tensor) -> torch.Tensor:
    """``u_t - k u_xx`` by autograd (inputs in the order ``(t, x)``)."""
    tx = tx.detach().requires_grad_(True)
    u = net(tx)
    (g,) = torch.autograd.grad(u.sum(), tx, create_graph=True)
    u_t, u_x = g[:, 0], g[:, 1]
    (g2,) = torch.autograd.grad(u_x.sum(), tx, create_graph=True)
    return u_t - scenario.K * g2[:, 1]


def sample(rng: np.random.Generator, n_col: int, n_ic: int, n_bc: int) -> dict[str, torch.Tensor]:
    """Collocation, initial and boundary points (uniformly random)."""
    t_end = scenario.T_END
    col = np.column_stack([rng.uniform(0, t_end, n_col), rng.uniform(0, 1, n_col)])
    x_ic = rng.uniform(0, 1, n_ic)
    ic = np.column_stack([np.zeros(n_ic), x_ic])
    t_bc = rng.uniform(0, t_end, n_bc)
    bc = np.concatenate(
        [np.column_stack([t_bc, np.zeros(n_bc)]), np.column_stack([t_bc, np.ones(n_bc)])]
    )
    return {
        "col": torch.tensor(col),
        "ic": torch.tensor(ic),
        "ic_val": torch.tensor(scenario.initial_value(x_ic)),
        "bc": torch.tensor(bc),
        "bc_val": torch.tensor(scenario.boundary_value(bc[:, 0], bc[:, 1])),
    }


def losses(net: Net, pts: dict[str, torch.Tensor], w_data: float) -> dict[str, torch.Tensor]:
    """The three loss terms and their weighted sum."""
    pde = pde_residual(net, pts["col"]).pow(2).mean()
    ic = (net(pts["ic"]) - pts["ic_val"]).pow(2).mean()
    bc = (net(pts["bc"]) - pts["bc_val"]).pow(2).mean()
    return {"pde": pde, "ic": ic, "bc": bc, "total": pde + w_data * (ic + bc)}


def to_mlp(net: Net, meta: dict[str, Any]) -> MLP:
    """The trained network as a numpy :class:`MLP`."""
    ws = [layer.weight.detach().numpy().copy() for layer in net.layers]
    bs = [layer.bias.detach().numpy().copy() for layer in net.layers]
    return MLP.from_arrays(ws, bs, "tanh", input_scaling=(IN_SHIFT, IN_SCALE), meta=meta)


def l2_error(model: MLP, n: int = 201) -> tuple[float, float]:
    """Absolute and relative space-time L2 error against the exact solution (trapezoid grid)."""
    t = np.linspace(0, scenario.T_END, n)
    x = np.linspace(*scenario.X_DOMAIN, n)
    tt, xx = np.meshgrid(t, x, indexing="ij")
    err = model(np.column_stack([tt.ravel(), xx.ravel()])).reshape(tt.shape)
    exact = scenario.exact_solution(tt, xx)
    sq = np.trapezoid(np.trapezoid((err - exact) ** 2, x, axis=1), t)
    ref = np.trapezoid(np.trapezoid(exact**2, x, axis=1), t)
    return float(np.sqrt(sq)), float(np.sqrt(sq / ref))


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT)
    parser.add_argument("--seed", type=int, default=20240611)
    parser.add_argument("--adam-steps", type=int, default=4000)
    parser.add_argument("--lbfgs-iters", type=int, default=1500)
    parser.add_argument("--n-col", type=int, default=4000)
    parser.add_argument("--n-ic", type=int, default=400)
    parser.add_argument("--n-bc", type=int, default=200)
    parser.add_argument("--w-data", type=float, default=10.0)
    parser.add_argument("--lr", type=float, default=3e-3)
    args = parser.parse_args(argv)

    torch.manual_seed(args.seed)
    torch.set_num_threads(1)
    torch.use_deterministic_algorithms(True)
    rng = np.random.default_rng(args.seed)
    net = Net()
    pts = sample(rng, args.n_col, args.n_ic, args.n_bc)
    start = time.perf_counter()

    opt = torch.optim.Adam(net.parameters(), lr=args.lr)
    sched = torch.optim.lr_scheduler.StepLR(opt, step_size=max(1, args.adam_steps // 3), gamma=0.3)
    for step in range(args.adam_steps):
        opt.zero_grad()
        loss = losses(net, pts, args.w_data)
        loss["total"].backward()
        opt.step()
        sched.step()
        if step % 500 == 0 or step == args.adam_steps - 1:
            print(f"adam {step:5d}  " + "  ".join(f"{k}={v.item():.3e}" for k, v in loss.items()))

    lbfgs_evals = 0
    if args.lbfgs_iters > 0:
        lbfgs = torch.optim.LBFGS(
            net.parameters(),
            lr=1.0,
            max_iter=args.lbfgs_iters,
            max_eval=int(1.25 * args.lbfgs_iters),
            history_size=50,
            tolerance_grad=1e-12,
            tolerance_change=1e-15,
            line_search_fn="strong_wolfe",
        )

        def closure() -> torch.Tensor:
            nonlocal lbfgs_evals
            lbfgs_evals += 1
            lbfgs.zero_grad()
            total = losses(net, pts, args.w_data)["total"]
            total.backward()
            return total

        lbfgs.step(closure)
    final = {k: float(v.item()) for k, v in losses(net, pts, args.w_data).items()}
    elapsed = time.perf_counter() - start
    print("final  " + "  ".join(f"{k}={v:.3e}" for k, v in final.items()))

    meta: dict[str, Any] = {
        "scenario": "demo.scenario: cooling steel strip, u_t = k*u_xx, k = 0.4",
        "inputs": list(scenario.AXES),
        "architecture": [2, *HIDDEN, 1],
        "activation": "tanh",
        "seed": args.seed,
        "adam_steps": args.adam_steps,
        "adam_lr": args.lr,
        "lbfgs_max_iter": args.lbfgs_iters,
        "lbfgs_evaluations": lbfgs_evals,
        "n_collocation": args.n_col,
        "n_initial": args.n_ic,
        "n_boundary": 2 * args.n_bc,
        "data_weight": args.w_data,
        "final_losses": final,
        "train_seconds": round(elapsed, 1),
        "torch_version": torch.__version__,
        "numpy_version": np.__version__,
    }
    model = to_mlp(net, meta)
    abs_err, rel_err = l2_error(model)
    model.meta["l2_error_vs_exact"] = abs_err
    model.meta["relative_l2_error_vs_exact"] = rel_err
    model.save_npz(args.out)
    print(json.dumps(model.meta, indent=2, sort_keys=True))
    print(f"wrote {args.out}")


if __name__ == "__main__":
    main()
