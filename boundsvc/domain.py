"""The geometry of a problem: time interval, space box and boundary kind per axis."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from api_schemas import ProblemSpec


@dataclass(frozen=True)
class Domain:
    """``[t0, T] x prod_a [low_a, high_a]`` with a boundary kind per spatial axis."""

    space: Mapping[str, tuple[float, float]]
    time: tuple[float, float] | None
    boundary: Mapping[str, str]

    @property
    def space_axes(self) -> tuple[str, ...]:
        return tuple(self.space)

    @property
    def dimension(self) -> int:
        return len(self.space)

    @property
    def volume(self) -> float:
        """Lebesgue measure of the space box (1 for an ODE system)."""
        return math.prod(high - low for low, high in self.space.values())

    def length(self, axis: str) -> float:
        low, high = self.space[axis]
        return high - low

    @property
    def dirichlet_axes(self) -> tuple[str, ...]:
        return tuple(a for a in self.space if self.boundary[a] == "dirichlet")

    @property
    def periodic_axes(self) -> tuple[str, ...]:
        return tuple(a for a in self.space if self.boundary[a] == "periodic")

    def face_area(self, axis: str) -> float:
        """Measure of one face normal to ``axis`` (1 in one dimension: a point)."""
        return math.prod(self.length(a) for a in self.space if a != axis)

    @classmethod
    def from_problem(cls, problem: ProblemSpec) -> Domain:
        return cls(
            space=dict(problem.space),
            time=problem.time,
            boundary={axis: problem.boundary_of(axis) for axis in problem.space},
        )
