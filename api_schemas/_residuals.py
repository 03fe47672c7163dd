"""Residual arrays on the wire: JSON numbers or base64 little-endian bytes."""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from api_schemas._common import Number


class EncodedArray(BaseModel):
    """A flat little-endian array in base64 (C order of (point, equation) for systems)."""

    model_config = ConfigDict(extra="forbid")

    dtype: Literal["float64", "float32"] = "float64"
    encoding: Literal["base64"] = "base64"
    data: str = Field(description="base64 of the little-endian bytes")


ResidualValues = list[Number] | list[list[Number]] | EncodedArray
