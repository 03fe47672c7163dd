"""How often the heuristic Gauss-Legendre upper limit misses the integral on coarse panels.

Draws random smooth squared residuals on [0, 1] (a cubic times an exponential times a sine,
half of them vanishing at both ends, then squared), samples them on n Gauss-Legendre nodes and
counts how often the upper limit stays below the integral (reference: a 4,001-node trapezoid
rule, far finer than any n here):

- ``tail``: quadrature sum + the Legendre-tail estimate (``legendre_tail``);
- ``floored``: the same, the allowance at least the sum itself (a floor the service used on
  4- and 5-node axes before it refused them).

Run: ``.venv/bin/python tools/coarse_gauss_sweep.py [--draws 3000] [--seed 0]``. The figures
behind ``MIN_GAUSS_NODES`` (docs/api.md, "Coarse Gauss-Legendre panels") come from the default
run.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable

import numpy as np

from boundsvc.quadrature._statements import legendre_tail


def _draw(rng: np.random.Generator) -> Callable[[np.ndarray], np.ndarray]:
    a = rng.normal(size=4)
    k, phase, e = rng.uniform(0.5, 6), rng.uniform(0, 6), rng.uniform(-2, 2)
    zero_ends = rng.random() < 0.5

    def g(s: np.ndarray) -> np.ndarray:
        cubic = a[0] + a[1] * s + a[2] * s**2 + a[3] * s**3
        ends = s * (1 - s) if zero_ends else 1.0
        return np.asarray((ends * cubic * np.exp(e * s) * np.sin(k * s + phase)) ** 2)

    return g


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--draws", type=int, default=3000)
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args()
    fine = np.linspace(0.0, 1.0, 4001)
    print("nodes  draws  below(tail)  below(floored)")
    for n in (3, 4, 5, 6, 8):
        rng = np.random.default_rng(args.seed)
        nodes, weights = np.polynomial.legendre.leggauss(n)
        x, w = (nodes + 1) / 2, weights / 2
        tail_misses = floored_misses = 0
        for _ in range(args.draws):
            g = _draw(rng)
            f = g(x)
            est = float(w @ f)
            tail = float(legendre_tail(f[None, :], n, 1.0)[0])
            true = float(np.trapezoid(g(fine), fine))
            tail_misses += est + tail < true
            floored_misses += est + max(tail, est) < true
        print(f"{n:5d}  {args.draws:5d}  {tail_misses:11d}  {floored_misses:14d}")


if __name__ == "__main__":
    main()
