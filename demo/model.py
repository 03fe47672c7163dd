"""The shipped demo surrogate for :mod:`demo.scenario` (the cooling steel strip)."""

from __future__ import annotations

from pathlib import Path

from boundsvc.client.mlp import MLP

__all__ = ["WEIGHTS_PATH", "load_demo_model"]

#: The trained weights, written by ``python -m demo.train_heated_strip``.
WEIGHTS_PATH = Path(__file__).resolve().parent / "heated_strip_weights.npz"


def load_demo_model() -> MLP:
    """Load the demo PINN: inputs ``(t, x)`` (in that order), output ``u``.

    Returns
    -------
    MLP
        A 2-20-20-1 ``tanh`` network with input scaling onto ``[-1, 1]^2``.
    """
    return MLP.load_npz(WEIGHTS_PATH)
