"""The problem object: a PDE (or ODE system) with its domain, parameters and boundary kind."""

from __future__ import annotations

import math
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from api_schemas._common import Number

BoundaryKind = Literal["dirichlet", "periodic"]

_AXES = ("x", "y", "z")


def _finite(value: float, what: str) -> float:
    if not math.isfinite(value):
        raise ValueError(f"{what} must be a finite number, got {value!r}")
    return value


class ProblemSpec(BaseModel):
    """A problem as the user writes it (see docs/api.md and the contract)."""

    model_config = ConfigDict(extra="forbid")

    equation: str | list[str] = Field(
        description="'lhs = rhs', or a list of them for an ODE system", examples=["u_t = k*u_xx"]
    )
    unknowns: list[str] | None = Field(
        default=None, description="Names of the unknowns (default ['u']); one per equation."
    )
    space: dict[str, tuple[Number, Number]] = Field(default_factory=dict)
    time: tuple[Number, Number] | None = None
    parameters: dict[str, Number] = Field(default_factory=dict)
    boundary: BoundaryKind | dict[str, BoundaryKind] = "dirichlet"
    initial_value: str | list[str] | None = None
    boundary_value: str | None = None
    initial_velocity: str | None = Field(
        default=None,
        description="u_t(x, t0) for a second-order-in-time equation (wave family), an "
        "expression in the space coordinates; used for data checks only",
    )

    @field_validator("equation")
    @classmethod
    def _equation_nonempty(cls, value: str | list[str]) -> str | list[str]:
        items = [value] if isinstance(value, str) else value
        if not items:
            raise ValueError("at least one equation is required")
        for item in items:
            if not item.strip():
                raise ValueError("an equation is empty")
        if len(items) > 16:
            raise ValueError("at most 16 equations are supported")
        return value

    @field_validator("space")
    @classmethod
    def _space_axes(cls, value: dict[str, tuple[float, float]]) -> dict[str, tuple[float, float]]:
        for name, (low, high) in value.items():
            if name not in _AXES:
                raise ValueError(f"space axis {name!r} is not one of x, y, z")
            _finite(low, f"space.{name} low end")
            _finite(high, f"space.{name} high end")
            if not low < high:
                raise ValueError(f"space.{name} must satisfy low < high, got [{low}, {high}]")
        order = [axis for axis in _AXES if axis in value]
        if order != list(_AXES[: len(order)]):
            raise ValueError("space axes must be x, then y, then z (use x for a 1-D problem)")
        return {axis: value[axis] for axis in order}

    @field_validator("time")
    @classmethod
    def _time_interval(cls, value: tuple[float, float] | None) -> tuple[float, float] | None:
        if value is None:
            return None
        t0, t1 = value
        _finite(t0, "time start")
        _finite(t1, "time end")
        if not t0 < t1:
            raise ValueError(f"time must satisfy t0 < T, got [{t0}, {t1}]")
        return value

    @field_validator("parameters")
    @classmethod
    def _parameters_finite(cls, value: dict[str, float]) -> dict[str, float]:
        if len(value) > 64:
            raise ValueError("at most 64 parameters are supported")
        for name, number in value.items():
            _finite(number, f"parameter {name!r}")
        return value

    @model_validator(mode="after")
    def _boundary_axes(self) -> ProblemSpec:
        if isinstance(self.boundary, dict):
            for axis in self.boundary:
                if axis not in self.space:
                    raise ValueError(f"boundary names axis {axis!r}, which is not in space")
        return self

    def boundary_of(self, axis: str) -> BoundaryKind:
        """The boundary kind of one spatial axis."""
        if isinstance(self.boundary, dict):
            return self.boundary.get(axis, "dirichlet")
        return self.boundary


class ProblemRequest(BaseModel):
    """Body of ``POST /v1/problems``."""

    model_config = ConfigDict(extra="forbid")

    problem: ProblemSpec
    regularity: dict[str, float | str] | None = Field(
        default=None, description="Optional: evaluate the constants for these regularity values."
    )


class RegularityRequirement(BaseModel):
    """One thing the theorem needs; any key of ``any_of`` satisfies it."""

    key: str
    any_of: list[str]
    purpose: str
    quantity: str


class ProblemResponse(BaseModel):
    """Result of ``POST /v1/problems``: the classification and the symbolic constants."""

    problem_id: str
    family: str
    theorem: str
    classification: dict[str, object]
    required_regularity: list[str]
    optional_regularity: list[str]
    regularity_requirements: list[RegularityRequirement]
    components: list[str]
    optional_components: list[str] = Field(
        default_factory=list,
        description="components a plan adds on request (POST /v1/plans optional_components)",
    )
    bounded_quantities: list[str]
    hypotheses: list[str]
    constants: list[dict[str, object]]
    warnings: list[str] = Field(default_factory=list)
    reference: str
