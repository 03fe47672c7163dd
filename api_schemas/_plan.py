"""Quadrature plans: nodes and weights for each residual component."""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from api_schemas._problem import ProblemSpec

RuleName = Literal["gauss-legendre"]


class PlanRequest(BaseModel):
    """Body of ``POST /v1/plans``."""

    model_config = ConfigDict(extra="forbid")

    problem: ProblemSpec | None = None
    problem_id: str | None = None
    rule: RuleName = "gauss-legendre"
    points: dict[str, int] = Field(
        default_factory=dict,
        description="Gauss-Legendre nodes per panel for each axis ('t', 'x', ...).",
    )
    panels: dict[str, int] = Field(
        default_factory=dict, description="Composite panels per axis (default 1)."
    )

    @model_validator(mode="after")
    def _one_problem(self) -> PlanRequest:
        if (self.problem is None) == (self.problem_id is None):
            raise ValueError("give exactly one of 'problem' and 'problem_id'")
        return self


class PlanComponent(BaseModel):
    """Points and weights of one component, in the order residuals must be sent."""

    name: str
    axes: list[str]
    points: list[list[float]]
    weights: list[float]
    size: int


class PlanResponse(BaseModel):
    """Result of ``POST /v1/plans``."""

    plan_id: str
    rule: str
    problem_id: str
    components: list[PlanComponent]
    axis_nodes: dict[str, list[float]] = Field(
        default_factory=dict, description="Per-axis nodes of the tensor rule (interior)."
    )
    time_nodes: list[float] = Field(default_factory=list)
    warnings: list[str] = Field(default_factory=list)


class InlinePlanComponent(BaseModel):
    """Client-chosen points and weights for one component (no plan id)."""

    model_config = ConfigDict(extra="forbid")

    axes: list[str]
    points: list[list[float]]
    weights: list[float]
