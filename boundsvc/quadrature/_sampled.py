"""Randomised plans: scrambled Sobol' with replicates, and plain Monte Carlo, in space.

Time stays on a Gauss-Legendre tensor axis (so the time profile of the bound exists); in each
time slice the space part of the interior (and the initial set) is sampled.

References
----------
.. [1] I. M. Sobol', USSR Comput. Math. Math. Phys. 7(4) (1967) 86-112.
.. [2] A. B. Owen, "Scrambled net variance for integrals of smooth functions",
   Ann. Statist. 25 (1997) 1541-1562 (randomised QMC, replicates).
.. [3] SciPy ``scipy.stats.qmc.Sobol`` (scrambled, ``random_base2`` keeps the net property).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import Any

import numpy as np
from scipy.stats import qmc

from boundsvc.domain import Domain
from boundsvc.quadrature._plan import (
    Component,
    Plan,
    PlanError,
    build_gauss_plan,
    share_initial_points,
)

MAX_REPLICATES = 64


def _unit_points(rule: str, dim: int, count: int, rng: np.random.Generator) -> np.ndarray:
    if rule == "sobol":
        m = round(float(np.log2(count)))
        engine = qmc.Sobol(d=dim, scramble=True, seed=rng)
        return np.asarray(engine.random_base2(m), dtype=np.float64)
    return rng.random((count, dim))


def build_sampled_plan(
    domain: Domain,
    component_names: Sequence[str],
    *,
    rule: str,
    n: int,
    replicates: int,
    seed: int,
    points: Mapping[str, int],
    panels: Mapping[str, int],
    spec: Mapping[str, Any],
) -> Plan:
    """Sobol' (``replicates`` independent scramblings) or Monte Carlo in space, GL in time.

    ``n`` is the number of interior points of one replicate; with ``n_t`` time nodes each time
    slice holds ``n / n_t`` space points per replicate (a power of two for Sobol').
    """
    if not domain.space_axes:
        raise PlanError(f"the {rule} rule samples space; this problem has no space axes", "rule")
    if domain.time is None:
        raise PlanError(f"the {rule} rule needs a time interval", "rule")
    if rule == "monte-carlo":
        replicates = 1
    if not 1 <= replicates <= MAX_REPLICATES or (rule == "sobol" and replicates < 2):
        raise PlanError(
            f"replicates must be between 2 and {MAX_REPLICATES} for sobol", "replicates"
        )
    base = build_gauss_plan(domain, component_names, points, panels, spec)
    assert base.time is not None
    n_t = base.time.size
    if n % n_t:
        raise PlanError(f"n = {n} is not a multiple of the {n_t} time nodes", "n")
    per_slice = n // n_t
    if per_slice < 2:
        raise PlanError(f"n = {n} leaves fewer than 2 space points per time slice", "n")
    if rule == "sobol" and per_slice & (per_slice - 1):
        raise PlanError(
            f"sobol needs a power of two per time slice; n / n_t = {per_slice} "
            f"(n = {n}, {n_t} time nodes)",
            "n",
        )
    rng = np.random.default_rng(seed)
    space = list(domain.space_axes)
    low = np.array([domain.space[a][0] for a in space])
    width = np.array([domain.space[a][1] - domain.space[a][0] for a in space])
    volume = float(np.prod(width))
    comps: dict[str, Component] = dict(base.components)
    for name in ("interior", "initial"):
        if name not in comps:
            continue
        blocks: list[np.ndarray] = []
        rep_index: list[np.ndarray] = []
        time_index: list[np.ndarray] = []
        slices = n_t if name == "interior" else 1
        for r in range(replicates):
            unit = _unit_points(rule, len(space), per_slice, rng) if rule == "sobol" else None
            for j in range(slices):
                cloud = _unit_points(rule, len(space), per_slice, rng) if unit is None else unit
                xyz = low + cloud * width
                if name == "interior":
                    tcol = np.full((per_slice, 1), base.time.nodes[j])
                    blocks.append(np.hstack([tcol, xyz]))
                else:
                    blocks.append(xyz)
                rep_index.append(np.full(per_slice, r, dtype=np.int64))
                time_index.append(np.full(per_slice, j, dtype=np.int64))
        pts = np.concatenate(blocks)
        reps = np.concatenate(rep_index)
        slice_w = np.full(pts.shape[0], volume / (per_slice * replicates))
        if name == "interior":
            tidx = np.concatenate(time_index)
            weights = slice_w * base.time.weights[tidx]
            comps[name] = replace(
                comps[name],
                points=pts,
                weights=weights,
                time_index=tidx,
                slice_weights=slice_w,
                rule=rule,
                replicate_index=reps,
                replicates=replicates,
                space_shape=(),
                space_panels=(),
            )
        else:
            comps[name] = replace(
                comps[name],
                points=pts,
                weights=slice_w,
                rule=rule,
                replicate_index=reps,
                replicates=replicates,
                space_shape=(),
                space_panels=(),
            )
    share_initial_points(comps)
    return replace(base, rule=rule, components=comps)
