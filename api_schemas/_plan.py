"""Quadrature plans: nodes and weights for each residual component."""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from api_schemas._common import Count, Number
from api_schemas._problem import ProblemSpec

RuleName = Literal["gauss-legendre", "sobol", "monte-carlo", "grid", "custom"]


class InlinePlanComponent(BaseModel):
    """Client-chosen points and weights for one component (no plan id)."""

    model_config = ConfigDict(extra="forbid")

    axes: list[str]
    points: list[list[Number]]
    weights: list[Number]


class PlanRequest(BaseModel):
    """Body of ``POST /v1/plans`` (every plan is reproducible from its request)."""

    model_config = ConfigDict(extra="forbid")

    problem: ProblemSpec | None = None
    problem_id: str | None = None
    rule: RuleName = "gauss-legendre"
    points: dict[str, Count] = Field(
        default_factory=dict,
        description="Nodes per panel and axis ('t', 'x', ...): Gauss-Legendre nodes (6 to 256), "
        "grid nodes; "
        "for sobol/monte-carlo only 't' (Gauss-Legendre time nodes).",
    )
    panels: dict[str, Count] = Field(
        default_factory=dict, description="Composite panels per axis (default 1)."
    )
    n: Count | None = Field(
        default=None,
        ge=2,
        le=4_000_000,
        description="sobol/monte-carlo: interior points per replicate (n / time nodes per slice)",
    )
    replicates: Count = Field(default=8, ge=1, le=64, description="sobol: independent scramblings")
    seed: Count | None = Field(
        default=None,
        ge=0,
        le=2**63 - 1,
        description="random seed (default: derived from the request)",
    )
    weights: Literal["trapezoid", "simpson"] = Field(
        default="trapezoid", description="grid: the composite rule of the uniform grid"
    )
    components: dict[str, InlinePlanComponent] | None = Field(
        default=None, description="custom: points and weights per component"
    )
    optional_components: list[str] = Field(
        default_factory=list,
        max_length=8,
        description="Components the family offers beyond the needed ones (listed as "
        "'optional_components' by POST /v1/problems), e.g. 'boundary_t' for the boundary "
        "lifting of the advection-diffusion family; the plan then has their points too.",
    )

    @model_validator(mode="after")
    def _one_problem(self) -> PlanRequest:
        if (self.problem is None) == (self.problem_id is None):
            raise ValueError("give exactly one of 'problem' and 'problem_id'")
        if self.rule in ("sobol", "monte-carlo") and self.n is None:
            raise ValueError(f"the {self.rule} rule needs 'n' (points per replicate)")
        if self.rule == "custom" and not self.components:
            raise ValueError("the custom rule needs 'components' with points and weights")
        if self.rule != "custom" and self.components is not None:
            raise ValueError("'components' is only used by the custom rule")
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
    seed: int | None = None
    replicates: int | None = None
