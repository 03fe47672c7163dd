"""Models shared by several endpoints."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field


class ProblemFieldError(BaseModel):
    """One offending field of a request (RFC 9457 extension member ``errors``)."""

    field: str = Field(description="Dotted path of the field at fault, e.g. 'problem.space.x'.")
    message: str
    index: int | None = Field(default=None, description="First offending array index, if any.")


class ProblemDetails(BaseModel):
    """RFC 9457 problem details, with boundsvc's stable ``code``."""

    model_config = ConfigDict(extra="allow")

    type: str = "about:blank"
    title: str
    status: int
    detail: str
    code: str
    instance: str | None = None
    request_id: str | None = None
    errors: list[ProblemFieldError] = Field(default_factory=list)


class ModelInfo(BaseModel):
    """Who the certified surrogate is: registry name, version, training epoch, free metadata."""

    model_config = ConfigDict(extra="forbid")

    name: str | None = Field(default=None, max_length=200)
    version: str | None = Field(default=None, max_length=200)
    epoch: int | None = Field(default=None, ge=0)
    metadata: dict[str, Any] = Field(default_factory=dict)
