"""Train the validation PINNs (PyTorch, float64, CPU, seeded) and cache them as MLP ``.npz``.

The loss is the physics-informed one of Raissi, Perdikaris and Karniadakis (J. Comput. Phys.
378 (2019) 686-707): the mean squared residual of the equations at uniformly random
collocation points plus ``w_data`` times the mean squared initial and boundary mismatch (the
boundary term is absent for hard-constrained outputs and ODEs). Adam with a step learning-rate
schedule, then L-BFGS with a strong-Wolfe line search, as in ``demo/train_heated_strip.py``.
The training points are drawn at random and are NOT the service's Gauss-Legendre nodes.
Navier-Stokes networks (inputs ``t, x, y``, outputs ``u, v, p``): mean squared momentum
residuals plus ``w_div`` x the squared divergence, ``w_data`` x the initial and wall velocity
mismatch, and ``w_per`` x the periodicity mismatch of ``u, v, p`` and of the first space
derivatives of ``u, v`` on random face pairs (:class:`validation.problems.FlowProblem`).

    .venv/bin/python -m validation.train                 # train the missing networks
    .venv/bin/python -m validation.train --force KEY ... # retrain these
"""

from __future__ import annotations

import argparse
import itertools
import time
from typing import Any

import numpy as np
import torch
from torch import nn

from boundsvc.client.mlp import MLP
from validation.models import WEIGHTS, weights_path
from validation.problems import Problem, all_trainable
from validation.problems.navier_stokes import FlowProblem, is_flow


class TorchLib:
    """The lift namespace for torch tensors."""

    tanh = staticmethod(torch.tanh)
    exp = staticmethod(torch.exp)
    sin = staticmethod(torch.sin)
    cos = staticmethod(torch.cos)


def _scaling(problem: Problem) -> tuple[np.ndarray, np.ndarray]:
    if isinstance(problem, FlowProblem):
        box = np.array([problem.time, *problem.space_box.values()])
        return (box[:, 0] + box[:, 1]) / 2, (box[:, 1] - box[:, 0]) / 2
    if problem.is_steady:
        box = np.array(problem.box)
        return (box[:, 0] + box[:, 1]) / 2, (box[:, 1] - box[:, 0]) / 2
    t0, t1 = problem.time
    lo = [t0]
    hi = [t1]
    if not problem.is_ode:
        xl, xr = problem.space
        lo.append(xl)
        hi.append(xr)
    a, b = np.array(lo), np.array(hi)
    return (a + b) / 2, (b - a) / 2


class Net(nn.Module):
    """``tanh`` MLP with input scaling onto ``[-1, 1]^d``, output scale, optional lift."""

    def __init__(self, problem: Problem) -> None:
        super().__init__()
        cfg = problem.train
        d, m = len(problem.axes), len(problem.outputs)
        widths = (d, *cfg.hidden, m)
        self.layers = nn.ModuleList(
            nn.Linear(a, b, dtype=torch.float64) for a, b in itertools.pairwise(widths)
        )
        shift, scale = _scaling(problem)
        self.register_buffer("shift", torch.tensor(shift))
        self.register_buffer("scale", torch.tensor(scale))
        self.out_scale = float(cfg.out_scale)
        self.problem = problem
        for layer in self.layers:
            assert isinstance(layer, nn.Linear)
            nn.init.xavier_normal_(layer.weight)
            nn.init.zeros_(layer.bias)

    def forward(self, pts: torch.Tensor) -> torch.Tensor:
        shift, scale = self.get_buffer("shift"), self.get_buffer("scale")
        z = (pts - shift) / scale
        for layer in self.layers[:-1]:
            z = torch.tanh(layer(z))
        u = self.out_scale * self.layers[-1](z)
        lift = self.problem.lift
        if lift is not None:
            xl, xr = self.problem.space
            t, x = pts[:, 0:1], pts[:, 1:2]
            u = lift.g(t, x, TorchLib) + (x - xl) * (xr - x) / (xr - xl) ** 2 * u
        return u


def torch_fields(net: Net, pts: torch.Tensor) -> dict[str, torch.Tensor]:
    """The fields the problem's operator needs, by autograd."""
    p = net.problem
    if p.is_steady:
        return _steady_fields(net, pts)
    if is_flow(p):
        return _flow_fields(net, pts)
    pts = pts.detach().requires_grad_(True)
    out = net(pts)
    fields: dict[str, torch.Tensor] = {}
    for j, name in enumerate(p.outputs):
        v = out[:, j]
        fields[name] = v
        if not any(f.startswith(name + "_") for f in p.fields):
            continue
        (g,) = torch.autograd.grad(v.sum(), pts, create_graph=True)
        fields[name + "_t"] = g[:, 0]
        if not p.is_ode:
            fields[name + "_x"] = g[:, 1]
            if name + "_xx" in p.fields:
                (g2,) = torch.autograd.grad(g[:, 1].sum(), pts, create_graph=True)
                fields[name + "_xx"] = g2[:, 1]
            if name + "_tt" in p.fields:  # second order in time (wave family)
                (g2,) = torch.autograd.grad(g[:, 0].sum(), pts, create_graph=True)
                fields[name + "_tt"] = g2[:, 0]
    return fields


def _steady_fields(net: Net, pts: torch.Tensor) -> dict[str, torch.Tensor]:
    """Steady problems: ``u``, ``u_<a>``, ``u_<a><a>`` per space axis and the source ``f``."""
    p = net.problem
    src = pts.detach().numpy()
    pts = pts.detach().requires_grad_(True)
    u = net(pts)[:, 0]
    fields: dict[str, torch.Tensor] = {"u": u}
    (g,) = torch.autograd.grad(u.sum(), pts, create_graph=True)
    for i, a in enumerate(p.axes):
        fields[f"u_{a}"] = g[:, i]
        if f"u_{a}{a}" in p.fields:
            (g2,) = torch.autograd.grad(g[:, i].sum(), pts, create_graph=True)
            fields[f"u_{a}{a}"] = g2[:, i]
    if p.source_term is not None:
        fields["f"] = torch.tensor(p.source_term(*src.T))
    return fields


def _flow_fields(net: Net, pts: torch.Tensor, *, second: bool = True) -> dict[str, torch.Tensor]:
    """Navier-Stokes (inputs ``t, x, y``; outputs ``u, v, p``): values, first derivatives of
    every output, second space derivatives of the velocity (unless ``second`` is False)."""
    pts = pts.detach().requires_grad_(True)
    out = net(pts)
    fields: dict[str, torch.Tensor] = {}
    for j, name in enumerate(net.problem.outputs):
        c = out[:, j]
        fields[name] = c
        (g,) = torch.autograd.grad(c.sum(), pts, create_graph=True)
        for i, a in enumerate(net.problem.axes):
            fields[f"{name}_{a}"] = g[:, i]
        if name == "p" or not second:
            continue
        for i, a in ((1, "x"), (2, "y")):
            (g2,) = torch.autograd.grad(g[:, i].sum(), pts, create_graph=True)
            fields[f"{name}_{a}{a}"] = g2[:, i]
    return fields


def _sample_flow(problem: FlowProblem, rng: np.random.Generator) -> dict[str, torch.Tensor]:
    """Navier-Stokes: random collocation points in ``(t0, T) x box``, initial points, wall
    points (``n_face`` per wall) with the exact velocity as target, and ``n_face`` random
    low-face points per periodic axis (their partners on the high face are formed in the
    loss)."""
    cfg = problem.train
    t0, t1 = problem.time
    box = problem.space_box
    (xl, xr), (yl, yr) = box["x"], box["y"]

    def uniform(n: int) -> np.ndarray:
        return np.column_stack(
            [rng.uniform(t0, t1, n), rng.uniform(xl, xr, n), rng.uniform(yl, yr, n)]
        )

    out: dict[str, torch.Tensor] = {"col": torch.tensor(uniform(cfg.n_col))}
    ic = uniform(cfg.n_ic)
    ic[:, 0] = t0
    out["ic"] = torch.tensor(ic)
    out["ic_val"] = torch.tensor(problem.exact(*ic.T)[:, :2])
    walls = []
    for axis in problem.wall_axes:
        k = 1 if axis == "x" else 2
        for v in box[axis]:
            face = uniform(problem.n_face)
            face[:, k] = v
            walls.append(face)
    if walls:
        bc = np.concatenate(walls)
        out["bc"] = torch.tensor(bc)
        out["bc_val"] = torch.tensor(problem.exact(*bc.T)[:, :2])
    for axis in problem.periodic_axes:
        k = 1 if axis == "x" else 2
        lo = uniform(problem.n_face)
        lo[:, k] = box[axis][0]
        hi = lo.copy()
        hi[:, k] = box[axis][1]
        out[f"per_lo_{axis}"] = torch.tensor(lo)
        out[f"per_hi_{axis}"] = torch.tensor(hi)
    return out


def _flow_losses(net: Net, pts: dict[str, torch.Tensor]) -> dict[str, torch.Tensor]:
    """Mean squared momentum residuals + ``w_div`` x mean squared divergence, and
    ``w_data`` x (initial + wall velocity mismatch) + ``w_per`` x periodicity mismatch
    (values of ``u, v, p`` and the first space derivatives of ``u, v`` on each face pair)."""
    p = net.problem
    assert isinstance(p, FlowProblem)
    mx, my, div = p.operator(_flow_fields(net, pts["col"]))
    out = {"momentum": mx.pow(2).mean() + my.pow(2).mean(), "div": div.pow(2).mean()}
    total = out["momentum"] + p.w_div * out["div"]
    out["ic"] = (net(pts["ic"])[:, :2] - pts["ic_val"]).pow(2).mean()
    data = out["ic"]
    if "bc" in pts:
        out["bc"] = (net(pts["bc"])[:, :2] - pts["bc_val"]).pow(2).mean()
        data = data + out["bc"]
    total = total + p.train.w_data * data
    if p.periodic_axes:
        per: Any = 0.0
        names = ("u", "v", "p", "u_x", "u_y", "v_x", "v_y")
        for axis in p.periodic_axes:
            lo = _flow_fields(net, pts[f"per_lo_{axis}"], second=False)
            hi = _flow_fields(net, pts[f"per_hi_{axis}"], second=False)
            per = per + sum((hi[n] - lo[n]).pow(2).mean() for n in names)
        out["periodic"] = per
        total = total + p.w_per * per
    out["total"] = total
    return out


def _sample_steady(problem: Problem, rng: np.random.Generator) -> dict[str, torch.Tensor]:
    """Steady problems: random interior points and ``n_bc`` random points on every face."""
    cfg = problem.train
    box = problem.box
    col = np.column_stack([rng.uniform(lo, hi, cfg.n_col) for lo, hi in box])
    faces = []
    for i, (lo, hi) in enumerate(box):
        for v in (lo, hi):
            face = np.column_stack([rng.uniform(a, b, cfg.n_bc) for a, b in box])
            face[:, i] = v
            faces.append(face)
    bc = np.concatenate(faces)
    return {
        "col": torch.tensor(col),
        "bc": torch.tensor(bc),
        "bc_val": torch.tensor(problem.exact(*bc.T))[:, None],
    }


def sample(problem: Problem, rng: np.random.Generator) -> dict[str, torch.Tensor]:
    """Uniformly random collocation, initial and boundary points with their target values."""
    if problem.is_steady:
        return _sample_steady(problem, rng)
    if isinstance(problem, FlowProblem):
        return _sample_flow(problem, rng)
    cfg = problem.train
    t0, t1 = problem.time
    out: dict[str, torch.Tensor] = {}
    if problem.is_ode:
        out["col"] = torch.tensor(rng.uniform(t0, t1, (cfg.n_col, 1)))
        out["ic"] = torch.tensor([[t0]])
        out["ic_val"] = torch.tensor(problem.initial(np.zeros(1))[None, :])
        return out
    xl, xr = problem.space
    out["col"] = torch.tensor(
        np.column_stack([rng.uniform(t0, t1, cfg.n_col), rng.uniform(xl, xr, cfg.n_col)])
    )
    x_ic = rng.uniform(xl, xr, cfg.n_ic)
    out["ic"] = torch.tensor(np.column_stack([np.full_like(x_ic, t0), x_ic]))
    out["ic_val"] = torch.tensor(problem.initial(x_ic))[:, None]
    if "u_tt" in problem.fields:  # wave family: the initial velocity u_t(t0, x) as well
        out["ic_t_val"] = torch.tensor(problem.boundary_rate(np.full_like(x_ic, t0), x_ic))
    if problem.lift is None:
        t_bc = rng.uniform(t0, t1, cfg.n_bc)
        bc = np.concatenate(
            [
                np.column_stack([t_bc, np.full_like(t_bc, xl)]),
                np.column_stack([t_bc, np.full_like(t_bc, xr)]),
            ]
        )
        out["bc"] = torch.tensor(bc)
        out["bc_val"] = torch.tensor(problem.boundary(bc[:, 0], bc[:, 1]))[:, None]
    return out


def losses(net: Net, pts: dict[str, torch.Tensor]) -> dict[str, torch.Tensor]:
    if is_flow(net.problem):
        return _flow_losses(net, pts)
    res = net.problem.operator(torch_fields(net, pts["col"]))
    pde = sum(r.pow(2).mean() for r in res)
    out = {"pde": pde}
    data: Any = 0.0
    if "ic" in pts:  # absent for steady problems
        out["ic"] = (net(pts["ic"]) - pts["ic_val"]).pow(2).mean()
        data = out["ic"]
    if "ic_t_val" in pts:
        out["ic_t"] = (torch_fields(net, pts["ic"])["u_t"] - pts["ic_t_val"]).pow(2).mean()
        data = data + out["ic_t"]
    if "bc" in pts:
        out["bc"] = (net(pts["bc"]) - pts["bc_val"]).pow(2).mean()
        data = data + out["bc"]
    out["total"] = pde + net.problem.train.w_data * data
    return out


def to_mlp(net: Net, meta: dict[str, Any]) -> MLP:
    linear = [layer for layer in net.layers if isinstance(layer, nn.Linear)]
    ws = [layer.weight.detach().numpy().copy() for layer in linear]
    bs = [layer.bias.detach().numpy().copy() for layer in linear]
    shift, scale = _scaling(net.problem)
    m = len(net.problem.outputs)
    out = None
    if net.out_scale != 1.0:
        out = (np.zeros(m), np.full(m, net.out_scale))
    return MLP.from_arrays(
        ws, bs, "tanh", input_scaling=(shift, scale), output_transform=out, meta=meta
    )


def train(problem: Problem, *, verbose: bool = True) -> MLP:
    """Train one network and write ``validation/weights/<key>.npz``."""
    cfg = problem.train
    torch.manual_seed(cfg.seed)
    torch.set_num_threads(1)
    rng = np.random.default_rng(cfg.seed)
    net = Net(problem)
    pts = sample(problem, rng)
    start = time.perf_counter()
    opt = torch.optim.Adam(net.parameters(), lr=cfg.lr)
    sched = torch.optim.lr_scheduler.StepLR(opt, step_size=max(1, cfg.adam_steps // 3), gamma=0.3)
    for _ in range(cfg.adam_steps):
        opt.zero_grad()
        losses(net, pts)["total"].backward()
        opt.step()
        sched.step()
    evals = 0
    if cfg.lbfgs_iters > 0:
        lbfgs = torch.optim.LBFGS(
            net.parameters(),
            lr=1.0,
            max_iter=cfg.lbfgs_iters,
            max_eval=int(1.25 * cfg.lbfgs_iters),
            history_size=50,
            tolerance_grad=1e-12,
            tolerance_change=1e-15,
            line_search_fn="strong_wolfe",
        )

        def closure() -> torch.Tensor:
            nonlocal evals
            evals += 1
            lbfgs.zero_grad()
            total = losses(net, pts)["total"]
            total.backward()
            return total

        lbfgs.step(closure)
    final = {k: float(v.item()) for k, v in losses(net, pts).items()}
    elapsed = time.perf_counter() - start
    meta: dict[str, Any] = {
        "problem": problem.key,
        "title": problem.title,
        "inputs": list(problem.axes),
        "outputs": list(problem.outputs),
        "architecture": [len(problem.axes), *cfg.hidden, len(problem.outputs)],
        "activation": "tanh",
        "seed": cfg.seed,
        "adam_steps": cfg.adam_steps,
        "adam_lr": cfg.lr,
        "lbfgs_max_iter": cfg.lbfgs_iters,
        "lbfgs_evaluations": evals,
        "n_collocation": cfg.n_col,
        "data_weight": cfg.w_data,
        "hard_bc": problem.lift is not None,
        "hard_bc_lift": problem.lift.description if problem.lift else None,
        "final_losses": final,
        "train_seconds": round(elapsed, 1),
        "torch_version": torch.__version__,
    }
    if isinstance(problem, FlowProblem):
        meta |= {
            "divergence_weight": problem.w_div,
            "periodic_weight": problem.w_per if problem.periodic_axes else None,
            "n_face": problem.n_face,
            "n_initial": cfg.n_ic,
        }
    model = to_mlp(net, meta)
    WEIGHTS.mkdir(parents=True, exist_ok=True)
    model.save_npz(weights_path(problem))
    if verbose:
        print(
            f"trained {problem.key:<28} {elapsed:6.1f} s  "
            + "  ".join(f"{k}={v:.2e}" for k, v in final.items())
        )
    return model


def train_missing(force: bool | list[str] = False) -> None:
    """Train every network whose weights are missing (or all / the named ones if forced)."""
    for problem in all_trainable():
        forced = force is True or (isinstance(force, list) and problem.key in force)
        if forced or not weights_path(problem).exists():
            train(problem)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description="train the validation PINNs")
    parser.add_argument("--force", nargs="*", default=None, help="retrain these keys (none: all)")
    parser.add_argument("--list", action="store_true", help="list the networks and exit")
    args = parser.parse_args(argv)
    if args.list:
        for p in all_trainable():
            print(p.key, "cached" if weights_path(p).exists() else "missing")
        return
    force: bool | list[str] = False
    if args.force is not None:
        force = args.force if args.force else True
    train_missing(force)


if __name__ == "__main__":
    main()
