"""Models shared by several endpoints."""

from __future__ import annotations

from typing import Annotated, Any

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, Strict


def _not_a_boolean(value: Any) -> Any:
    if isinstance(value, bool):
        raise ValueError("a boolean is not a number")
    return value


#: A number in a request: an integer or a float, never a boolean (JSON ``true`` would
#: otherwise be read as 1.0). Strict float: validated in pydantic-core, no Python call per
#: element, so it also serves long residual arrays.
Number = Annotated[float, Strict()]

#: A count in a request: an integer (a float with an integral value too), never a boolean.
Count = Annotated[int, BeforeValidator(_not_a_boolean)]


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
    epoch: Count | None = Field(default=None, ge=0)
    metadata: dict[str, Any] = Field(default_factory=dict)
