"""Plans from points and weights chosen by the client (accepted, labelled, warned about).

The time profile needs slices: the distinct times of the interior points become the time nodes
(forcing interpolated piecewise linearly between them); each slice's weights are normalised so
that they integrate over space, and the time weights are what remains.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from boundsvc.domain import Domain
from boundsvc.quadrature._plan import Component, Face, Plan, PlanError, TimeGrid, plan_id_for

MAX_CUSTOM_POINTS = 2_000_000
_TOL = 1e-12


def _array(
    name: str, points: Any, weights: Any, axes: Sequence[str]
) -> tuple[np.ndarray, np.ndarray]:
    pts = np.asarray(points, dtype=np.float64)
    wts = np.asarray(weights, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] != len(axes):
        raise PlanError(
            f"{name}: points must be rows of {len(axes)} coordinates ({', '.join(axes)})",
            f"plan.{name}.points",
        )
    if wts.shape != (pts.shape[0],):
        raise PlanError(f"{name}: one weight per point is needed", f"plan.{name}.weights")
    if pts.shape[0] > MAX_CUSTOM_POINTS:
        raise PlanError(f"{name}: at most {MAX_CUSTOM_POINTS} points", f"plan.{name}.points")
    if not (np.all(np.isfinite(pts)) and np.all(np.isfinite(wts))):
        raise PlanError(f"{name}: points and weights must be finite", f"plan.{name}")
    if np.any(wts < 0):
        raise PlanError(
            f"{name}: weights must be >= 0 (index {int(np.argmax(wts < 0))})",
            f"plan.{name}.weights",
        )
    return pts, wts


def _check_inside(name: str, pts: np.ndarray, axes: Sequence[str], domain: Domain) -> None:
    for k, axis in enumerate(axes):
        lo, hi = domain.time if axis == "t" else domain.space[axis]  # type: ignore[misc]
        span = hi - lo
        bad = np.flatnonzero((pts[:, k] < lo - _TOL * span) | (pts[:, k] > hi + _TOL * span))
        if bad.size:
            raise PlanError(
                f"{name}: point {int(bad[0])} lies outside the domain along {axis}",
                f"plan.{name}.points",
            )


def build_custom_plan(
    domain: Domain,
    component_names: Sequence[str],
    components: Mapping[str, Mapping[str, Any]],
    spec: Mapping[str, Any],
) -> Plan:
    """A plan from client points and weights (components named as in the contract)."""
    if domain.time is None:
        raise PlanError("custom plans need a time interval in this version", "plan")
    space = list(domain.space_axes)
    full_axes = ["t", *space]
    for name in component_names:
        if name not in components:
            raise PlanError(f"the theorem needs the component {name!r}", f"plan.{name}")
    for name in components:
        if name not in component_names:
            raise PlanError(
                f"component {name!r} is not used by this problem's theorem", f"plan.{name}"
            )
    interior = components["interior"]
    if list(interior["axes"]) != full_axes:
        raise PlanError(f"interior axes must be {full_axes}", "plan.interior.axes")
    pts, wts = _array("interior", interior["points"], interior["weights"], full_axes)
    _check_inside("interior", pts, full_axes, domain)
    nodes, time_index = np.unique(pts[:, 0], return_inverse=True)
    volume = domain.volume
    slice_mass = np.bincount(time_index, weights=wts, minlength=nodes.size)
    if np.any(slice_mass <= 0):
        raise PlanError(
            "every time slice of the interior needs positive weight", "plan.interior.weights"
        )
    time_weights = slice_mass / volume
    time = TimeGrid(
        edges=np.array(domain.time, dtype=np.float64),
        nodes=nodes,
        weights=time_weights,
        nodes_per_panel=nodes.size,
        mode="linear",
    )
    comps: dict[str, Component] = {
        "interior": Component(
            "interior",
            tuple(full_axes),
            pts,
            wts,
            time_index=time_index.astype(np.int64),
            slice_weights=wts / time_weights[time_index],
            rule="custom",
        ),
    }
    for name in component_names:
        if name == "interior":
            continue
        item = components[name]
        if name == "initial" or name.startswith("initial_"):
            if list(item["axes"]) != space:
                raise PlanError(f"{name} axes must be {space}", f"plan.{name}.axes")
            p, w = _array(name, item["points"], item["weights"], space)
            _check_inside(name, p, space, domain)
            comps[name] = Component(name, tuple(space), p, w, rule="custom")
            continue
        if list(item["axes"]) != full_axes:
            raise PlanError(f"{name} axes must be {full_axes}", f"plan.{name}.axes")
        p, w = _array(name, item["points"], item["weights"], full_axes)
        _check_inside(name, p, full_axes, domain)
        dirichlet = name in ("boundary", "boundary_t")
        kinds = ("dirichlet",) if dirichlet else ("periodic",)
        sides = ("low", "high") if dirichlet else ("low",)
        faces = [Face(a, side) for a in space if domain.boundary[a] in kinds for side in sides]
        face_index = np.full(p.shape[0], -1, dtype=np.int64)
        for f, face in enumerate(faces):
            k = full_axes.index(face.axis)
            lo, hi = domain.space[face.axis]
            target = lo if face.side == "low" else hi
            on = (face_index < 0) & np.isclose(p[:, k], target, rtol=0, atol=_TOL * (hi - lo))
            face_index[on] = f
        if np.any(face_index < 0):
            i = int(np.argmax(face_index < 0))
            raise PlanError(
                f"{name}: point {i} is not on a boundary face of the right kind",
                f"plan.{name}.points",
            )
        t_idx = np.searchsorted(nodes, p[:, 0])
        t_idx = np.clip(t_idx, 0, nodes.size - 1)
        if not np.allclose(nodes[t_idx], p[:, 0], rtol=0, atol=1e-12):
            raise PlanError(
                f"{name}: boundary times must be among the interior's times", f"plan.{name}.points"
            )
        comps[name] = Component(
            name,
            tuple(full_axes),
            p,
            w,
            time_index=t_idx.astype(np.int64),
            slice_weights=w / time_weights[t_idx],
            faces=tuple(faces),
            face_index=face_index,
            rule="custom",
        )
    return Plan(
        plan_id=plan_id_for(spec),
        rule="custom",
        spec=dict(spec),
        components=comps,
        time=time,
        axis_nodes={"t": nodes},
    )
