"""Quadrature plans: the points at which a client evaluates residuals, and their weights.

A plan keeps time on a tensor axis so that every residual integral can be taken per time node;
this is what gives the certificate its time profile (Gronwall's inequality is applied in time).
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from numpy.typing import NDArray

from boundsvc.domain import Domain
from boundsvc.quadrature._gauss import gauss_legendre

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
AxisRule = Callable[[int, float, float, int], tuple[FloatArray, FloatArray, FloatArray]]

DEFAULT_POINTS = {"t": 32, "x": 32, "y": 16, "z": 12}
#: Fewest Gauss-Legendre nodes per panel on an axis. Fewer nodes cannot resolve a squared
#: residual, and the heuristic quadrature allowance (decay of the last two discrete Legendre
#: coefficients) then says little: on random smooth squared residuals its upper limit stayed
#: below the integral for 188 / 29 / 3 of 3,000 draws with 3 / 4 / 5 nodes and for none with
#: 6 or 8 (tools/coarse_gauss_sweep.py), and randomized probes through the HTTP contract found
#: bounds below the true error on 3- and 4-node axes, also with the allowance floored at the
#: estimate (docs/reliability.md). Own threshold, from these measurements.
MIN_GAUSS_NODES = 6
MAX_PLAN_POINTS = 16_000_000


class PlanError(ValueError):
    """A plan request that cannot be honoured (becomes HTTP 422, code ``plan_invalid``)."""

    def __init__(self, message: str, field: str) -> None:
        super().__init__(message)
        self.field = field


@dataclass(frozen=True)
class Face:
    """One face of the space box: ``axis`` at its ``side`` ('low' or 'high')."""

    axis: str
    side: str

    @property
    def outward_sign(self) -> float:
        """Sign of the outward normal along ``axis``."""
        return -1.0 if self.side == "low" else 1.0


@dataclass(frozen=True)
class TimeGrid:
    """The tensor time axis of a plan: composite Gauss-Legendre nodes in panels."""

    edges: FloatArray
    nodes: FloatArray
    weights: FloatArray
    nodes_per_panel: int
    # "gauss": Gauss-Legendre nodes inside each panel, forcing interpolated by the panel's
    # polynomial; "linear": arbitrary sorted nodes (grids, client points), forcing interpolated
    # piecewise linearly (constant beyond the first and last node), one panel.
    mode: str = "gauss"

    @property
    def t0(self) -> float:
        return float(self.edges[0])

    @property
    def t_end(self) -> float:
        return float(self.edges[-1])

    @property
    def size(self) -> int:
        return int(self.nodes.size)


@dataclass(frozen=True)
class Component:
    """Points and weights of one residual component.

    ``time_index[i]`` is the time node of point ``i`` and ``slice_weights[i]`` its weight within
    that time slice, so that ``sum_i weights[i] f_i = sum_j w_t[j] sum_{i: t_i = t_j}
    slice_weights[i] f_i``. ``face_index`` says which face a boundary point lies on.
    """

    name: str
    axes: tuple[str, ...]
    points: FloatArray
    weights: FloatArray
    time_index: IntArray | None = None
    slice_weights: FloatArray | None = None
    faces: tuple[Face, ...] = ()
    face_index: IntArray | None = None
    # How the space part of each time slice was sampled, for the error statement:
    # "gauss-legendre" (tensor, ``space_shape`` nodes per axis, ``space_panels`` panels),
    # "sobol" / "monte-carlo" (``replicate_index`` of each point), "grid-trapezoid",
    # "grid-simpson", or "custom".
    rule: str = "gauss-legendre"
    space_shape: tuple[int, ...] = ()
    space_panels: tuple[int, ...] = ()
    replicate_index: IntArray | None = None
    replicates: int = 1
    space_lengths: tuple[float, ...] = ()
    # Set (to the very ``time_index`` array) when that index is ``repeat(arange(n_times),
    # size // n_times)``: slice ``j`` is the contiguous block ``j`` of points, so per-slice
    # sums are row sums of a reshape (see ``slice_integrals``). Compared by identity, so a
    # ``replace`` with another ``time_index`` (sampled plans reorder points) drops it.
    time_major_index: IntArray | None = field(default=None, repr=False, compare=False)

    @property
    def time_major(self) -> bool:
        return self.time_major_index is not None and self.time_major_index is self.time_index

    @property
    def size(self) -> int:
        return int(self.weights.size)


@dataclass(frozen=True)
class Plan:
    """A complete plan: its id, rule, time grid and components (in wire order)."""

    plan_id: str
    rule: str
    spec: Mapping[str, Any]
    components: Mapping[str, Component]
    time: TimeGrid | None
    axis_nodes: Mapping[str, FloatArray] = field(default_factory=dict)


def plan_id_for(spec: Mapping[str, Any]) -> str:
    """Content id of a plan: SHA-256 of its canonical request (a plan is rebuilt from it)."""
    canonical = json.dumps(spec, sort_keys=True, separators=(",", ":"))
    return "pln_" + hashlib.sha256(canonical.encode()).hexdigest()[:32]


def _counts(
    domain: Domain, points: Mapping[str, int], panels: Mapping[str, int], minimum: int = 1
) -> dict[str, tuple[int, int]]:
    axes = (["t"] if domain.time is not None else []) + list(domain.space_axes)
    for name in list(points) + list(panels):
        if name not in axes:
            raise PlanError(
                f"axis {name!r} is not an axis of this problem ({', '.join(axes)})",
                f"points.{name}",
            )
    result: dict[str, tuple[int, int]] = {}
    for name in axes:
        n = int(points.get(name, DEFAULT_POINTS[name]))
        m = int(panels.get(name, 1))
        if not 1 <= n <= 256:
            raise PlanError(
                f"points.{name} must be between 1 and 256 per panel, got {n}", f"points.{name}"
            )
        if n < minimum:
            raise PlanError(
                f"points.{name}: at least {minimum} Gauss-Legendre nodes per panel, got {n}: "
                "fewer cannot resolve a residual, and the quadrature allowance then leaves "
                "bounds below the true error (more panels for long axes, more nodes where the "
                "residual oscillates)",
                f"points.{name}",
            )
        if not 1 <= m <= 256:
            raise PlanError(f"panels.{name} must be between 1 and 256, got {m}", f"panels.{name}")
        result[name] = (n, m)
    return result


def _tensor(
    axes_nodes: Sequence[FloatArray], axes_weights: Sequence[FloatArray]
) -> tuple[FloatArray, FloatArray]:
    grids = np.meshgrid(*axes_nodes, indexing="ij")
    points = np.stack([g.ravel() for g in grids], axis=1) if grids else np.zeros((1, 0))
    weight_grids = np.meshgrid(*axes_weights, indexing="ij")
    weights = np.ones(points.shape[0])
    for w in weight_grids:
        weights = weights * w.ravel()
    return points, weights


def build_gauss_plan(
    domain: Domain,
    component_names: Sequence[str],
    points: Mapping[str, int],
    panels: Mapping[str, int],
    spec: Mapping[str, Any],
    axis_rule: AxisRule | None = None,
    rule_name: str = "gauss-legendre",
) -> Plan:
    """Tensor plan over ``[t0, T] x space`` with the requested components.

    ``axis_rule(n, low, high, panels) -> (nodes, weights, edges)`` is the 1-D rule on every
    axis (composite Gauss-Legendre by default; uniform grids give a "linear" time grid).

    Point order is C order over the axes ``(t, x, y, z)``: time is the slowest index, so the
    points of one time slice are contiguous.
    """
    rule_1d = axis_rule or gauss_legendre
    counts = _counts(domain, points, panels, MIN_GAUSS_NODES if axis_rule is None else 1)
    total = 1
    for n, m in counts.values():
        total *= n * m
    if total > MAX_PLAN_POINTS:
        raise PlanError(
            f"the plan would have {total} interior points; at most {MAX_PLAN_POINTS}", "points"
        )
    axis_nodes: dict[str, FloatArray] = {}
    axis_weights: dict[str, FloatArray] = {}
    time_grid: TimeGrid | None = None
    if domain.time is not None:
        n, m = counts["t"]
        nodes, weights, edges = rule_1d(n, domain.time[0], domain.time[1], m)
        axis_nodes["t"], axis_weights["t"] = nodes, weights
        if axis_rule is None:
            time_grid = TimeGrid(edges=edges, nodes=nodes, weights=weights, nodes_per_panel=n)
        else:
            time_grid = TimeGrid(
                edges=np.array([domain.time[0], domain.time[1]]),
                nodes=nodes,
                weights=weights,
                nodes_per_panel=nodes.size,
                mode="linear",
            )
    for axis in domain.space_axes:
        n, m = counts[axis]
        low, high = domain.space[axis]
        nodes, weights, _ = rule_1d(n, low, high, m)
        axis_nodes[axis], axis_weights[axis] = nodes, weights

    space = list(domain.space_axes)
    all_axes = (["t"] if time_grid is not None else []) + space
    comps: dict[str, Component] = {}
    for name in component_names:
        if name == "interior":
            pts, wts = _tensor(
                [axis_nodes[a] for a in all_axes], [axis_weights[a] for a in all_axes]
            )
            comps[name] = _sliced(name, tuple(all_axes), pts, wts, time_grid)
        elif name == "initial" and not space and time_grid is not None:
            # ODE system (no space axes): the single point t0, axes ["t"], weight 1
            comps[name] = Component(
                name=name, axes=("t",), points=np.array([[time_grid.t0]]), weights=np.ones(1)
            )
        elif name == "initial" or name.startswith("initial_"):
            # initial_<d>: a derivative of the initial residual (wave family), same points
            pts, wts = _tensor([axis_nodes[a] for a in space], [axis_weights[a] for a in space])
            comps[name] = Component(name=name, axes=tuple(space), points=pts, weights=wts)
        elif name in ("boundary", "boundary_t"):
            faces = [
                Face(a, side)
                for a in space
                if domain.boundary[a] == "dirichlet"
                for side in ("low", "high")
            ]
            comps[name] = _faces_component(
                name, faces, domain, all_axes, axis_nodes, axis_weights, time_grid
            )
        elif name == "periodic" or name.startswith("periodic_"):
            faces = [Face(a, "low") for a in space if domain.boundary[a] == "periodic"]
            comps[name] = _faces_component(
                name, faces, domain, all_axes, axis_nodes, axis_weights, time_grid
            )
        else:  # pragma: no cover - families only ask for the names above
            raise PlanError(f"unknown component {name!r}", "components")
    shape = tuple(counts[a][0] * counts[a][1] for a in space)
    panels_per_axis = tuple(counts[a][1] for a in space)
    for name in ("interior", "initial"):
        if name in comps:
            comps[name] = replace(
                comps[name],
                space_shape=shape,
                space_panels=panels_per_axis,
                rule=rule_name,
                space_lengths=tuple(domain.length(a) for a in space),
            )
    share_initial_points(comps)
    return Plan(
        plan_id=plan_id_for(spec),
        rule=rule_name,
        spec=dict(spec),
        components=comps,
        time=time_grid,
        axis_nodes=axis_nodes,
    )


def share_initial_points(comps: dict[str, Component]) -> None:
    """``initial_<d>`` components (derivatives of the initial residual) reuse the points,
    weights and rule of ``initial`` exactly, so their integrals can be combined."""
    if "initial" in comps:
        for name in comps:
            if name.startswith("initial_"):
                comps[name] = replace(comps["initial"], name=name)


def _sliced(
    name: str, axes: tuple[str, ...], pts: FloatArray, wts: FloatArray, time_grid: TimeGrid | None
) -> Component:
    if time_grid is None:
        return Component(name=name, axes=axes, points=pts, weights=wts)
    per_slice = pts.shape[0] // time_grid.size
    time_index = np.repeat(np.arange(time_grid.size, dtype=np.int64), per_slice)
    slice_weights = wts / time_grid.weights[time_index]
    return Component(
        name=name,
        axes=axes,
        points=pts,
        weights=wts,
        time_index=time_index,
        slice_weights=slice_weights,
        time_major_index=time_index,
    )


def _faces_component(
    name: str,
    faces: Sequence[Face],
    domain: Domain,
    all_axes: Sequence[str],
    axis_nodes: Mapping[str, FloatArray],
    axis_weights: Mapping[str, FloatArray],
    time_grid: TimeGrid | None,
) -> Component:
    """Points on the given faces; per face the time-major tensor over the other axes."""
    blocks_p: list[FloatArray] = []
    blocks_w: list[FloatArray] = []
    blocks_t: list[IntArray] = []
    blocks_s: list[FloatArray] = []
    blocks_f: list[IntArray] = []
    for index, face in enumerate(faces):
        low, high = domain.space[face.axis]
        fixed = np.array([low if face.side == "low" else high])
        nodes = [fixed if a == face.axis else axis_nodes[a] for a in all_axes]
        weights = [np.ones(1) if a == face.axis else axis_weights[a] for a in all_axes]
        pts, wts = _tensor(nodes, weights)
        comp = _sliced(name, tuple(all_axes), pts, wts, time_grid)
        blocks_p.append(pts)
        blocks_w.append(wts)
        if comp.time_index is not None and comp.slice_weights is not None:
            blocks_t.append(comp.time_index)
            blocks_s.append(comp.slice_weights)
        blocks_f.append(np.full(pts.shape[0], index, dtype=np.int64))
    if not blocks_p:
        empty = np.zeros((0, len(all_axes)))
        return Component(
            name=name,
            axes=tuple(all_axes),
            points=empty,
            weights=np.zeros(0),
            faces=tuple(faces),
            face_index=np.zeros(0, dtype=np.int64),
        )
    return Component(
        name=name,
        axes=tuple(all_axes),
        points=np.concatenate(blocks_p),
        weights=np.concatenate(blocks_w),
        time_index=np.concatenate(blocks_t) if blocks_t else None,
        slice_weights=np.concatenate(blocks_s) if blocks_s else None,
        faces=tuple(faces),
        face_index=np.concatenate(blocks_f),
    )
