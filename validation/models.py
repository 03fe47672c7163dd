"""Cached networks: where they live and how a hard-constrained one gets its output transform."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from boundsvc.client.mlp import MLP, Jet
from validation.problems import JetLib, Problem

WEIGHTS = Path(__file__).resolve().parent / "weights"


def weights_path(problem: Problem, weights_key: str | None = None) -> Path:
    return WEIGHTS / f"{weights_key or problem.key}.npz"


def hard_transform(problem: Problem) -> Any:
    """``u = g(t, x) + (x - xL)(xR - x)/L^2 * N`` as an exact Jet map (for :class:`MLP`)."""
    if problem.lift is None:
        raise ValueError(f"{problem.key} has no lift")
    lift = problem.lift
    xl, xr = problem.space
    length2 = (xr - xl) ** 2

    def transform(xj: Jet, u: Jet) -> Jet:
        t, x = xj[:, 0:1], xj[:, 1:2]
        g = lift.g(t, x, JetLib)
        d = (x - xl) * (xr - x) / length2
        out: Jet = g + d * u
        return out

    return transform


def load_model(problem: Problem, weights_key: str | None = None) -> MLP:
    """The cached network of ``problem`` (with its hard-BC transform when it was trained so)."""
    path = weights_path(problem, weights_key)
    if not path.exists():
        raise FileNotFoundError(
            f"{path} is missing: run `python -m validation.run --retrain` (or validation.train)"
        )
    net = MLP.load_npz(path)
    if net.meta.get("hard_bc"):
        net = MLP(
            net.weights,
            net.biases,
            net.activation,
            in_shift=net.in_shift,
            in_scale=net.in_scale,
            out_shift=net.out_shift,
            out_scale=net.out_scale,
            output_transform=hard_transform(problem),
            meta=net.meta,
        )
    return net
