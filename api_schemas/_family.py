"""The catalogue of stability theorems."""

from __future__ import annotations

from pydantic import BaseModel


class FamilyInfo(BaseModel):
    """One family: what it covers, what it needs, what it bounds, where it comes from."""

    id: str
    title: str
    equation_form: str
    hypotheses: list[str]
    required_regularity: list[str]
    optional_regularity: list[str]
    bounded_quantities: list[str]
    components: list[str]
    reference: str
    theory_document: str


class FamilyList(BaseModel):
    """Body of ``GET /v1/families``."""

    families: list[FamilyInfo]
