"""Studies: several certificates compared with measured errors and along a swept parameter."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from api_schemas._common import Number

BoundQuantity = Literal["l2_space_time", "l2_final_time"]


class SweptParameter(BaseModel):
    """The parameter the certificates differ in, and its value for each certificate."""

    model_config = ConfigDict(extra="forbid")

    name: str = Field(min_length=1, max_length=100)
    values: dict[str, Number] = Field(description="certificate id -> parameter value")

    @field_validator("values")
    @classmethod
    def _finite(cls, values: dict[str, float]) -> dict[str, float]:
        for cid, value in values.items():
            if value != value or value in (float("inf"), float("-inf")):
                raise ValueError(f"values[{cid!r}] must be finite")
        return values


class StudyRequest(BaseModel):
    """Body of ``POST /v1/studies``."""

    model_config = ConfigDict(extra="forbid")

    certificate_ids: list[str] = Field(min_length=1, max_length=500)
    measured_errors: dict[str, Number] | None = Field(
        default=None, description="certificate id -> measured error in the bounded norm (> 0)"
    )
    swept_parameter: SweptParameter | None = None
    title: str | None = Field(default=None, max_length=200)
    bound: BoundQuantity = Field(
        default="l2_space_time", description="which bound of each certificate is compared"
    )
    confidence_level: Number = Field(default=0.95, gt=0.0, lt=1.0)

    @field_validator("measured_errors")
    @classmethod
    def _positive(cls, errors: dict[str, float] | None) -> dict[str, float] | None:
        for cid, value in (errors or {}).items():
            if not (value > 0 and value != float("inf")):
                raise ValueError(f"measured_errors[{cid!r}] must be a finite number > 0")
        return errors

    @model_validator(mode="after")
    def _ids_known(self) -> StudyRequest:
        ids = set(self.certificate_ids)
        if len(ids) != len(self.certificate_ids):
            raise ValueError("certificate_ids must not repeat an id")
        extra = set(self.measured_errors or {}) - ids
        if self.swept_parameter is not None:
            extra |= set(self.swept_parameter.values) - ids
        if extra:
            raise ValueError(f"ids not in certificate_ids: {', '.join(sorted(extra))}")
        return self


class StudySummary(BaseModel):
    """One row of ``GET /v1/studies``."""

    id: str
    title: str | None = None
    created_at: str
    certificates: int
    median_effectivity: float | None = None


class StudyList(BaseModel):
    """Body of ``GET /v1/studies`` (newest first)."""

    items: list[StudySummary]


class Study(BaseModel):
    """A stored study (immutable); see ``docs/reports.md`` for every field."""

    model_config = ConfigDict(extra="allow")

    id: str
    title: str | None = None
    created_at: str
    bound_quantity: BoundQuantity
    certificate_ids: list[str]
    items: list[dict[str, Any]]
    effectivity: dict[str, Any] | None = None
    correlation: dict[str, Any] | None = None
    parameter_trend: dict[str, Any] | None = None
    notes: list[str] = Field(default_factory=list)
