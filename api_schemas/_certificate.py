"""Certificates: the stored result of one certification."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from api_schemas._common import ModelInfo, Number
from api_schemas._plan import InlinePlanComponent
from api_schemas._problem import ProblemSpec
from api_schemas._residuals import ResidualValues

Rigor = Literal["proven", "assumed", "statistical", "heuristic"]
Status = Literal["valid", "vacuous", "invalid-hypotheses"]


class QuadratureOptions(BaseModel):
    """How residual integrals are stated (confidence of statistical limits, error terms)."""

    model_config = ConfigDict(extra="forbid")

    confidence: Number = Field(
        default=0.95, gt=0.5, lt=1.0, description="joint confidence of all statistical statements"
    )
    derivative_bounds: dict[str, dict[str, Number]] = Field(
        default_factory=dict,
        description="component -> axis -> bound on |d^{2n} (r^2) / d axis^{2n}| "
        "(Gauss-Legendre error term)",
    )
    residual_bounds: dict[str, Number] = Field(
        default_factory=dict, description="component -> bound on |r| (Hoeffding limit)"
    )


class CertificateRequest(BaseModel):
    """Body of ``POST /v1/certificates``."""

    model_config = ConfigDict(extra="forbid")

    problem: ProblemSpec | None = None
    problem_id: str | None = None
    regularity: dict[str, Number | str] = Field(default_factory=dict)
    plan_id: str | None = None
    plan: dict[str, InlinePlanComponent] | None = Field(
        default=None, description="Inline points and weights per component instead of plan_id."
    )
    residuals: dict[str, ResidualValues] = Field(default_factory=dict)
    fields: dict[str, dict[str, ResidualValues]] | None = Field(
        default=None,
        description="Fields mode: per component (interior, initial, boundary), the model's "
        "values and derivatives at the plan's points by name ('u', 'u_t', 'u_x', 'u_xx', ...); "
        "the service forms that component's residual from the declared equation and data. "
        "A component is sent as residuals or as fields, not both.",
    )
    model: ModelInfo | None = None
    quadrature: QuadratureOptions | None = None
    archive: bool | None = Field(
        default=None,
        description="Keep a compressed copy of the decoded residuals so that the certificate "
        "can be re-verified later (POST /v1/certificates/{id}/verify); null: the deployment's "
        "default (BOUNDSVC_ARCHIVE_RESIDUALS). Not part of the certificate id.",
    )

    @model_validator(mode="after")
    def _exactly_one(self) -> CertificateRequest:
        if (self.problem is None) == (self.problem_id is None):
            raise ValueError("give exactly one of 'problem' and 'problem_id'")
        if (self.plan_id is None) == (self.plan is None):
            raise ValueError("give exactly one of 'plan_id' and 'plan'")
        return self


class Bound(BaseModel):
    """The bounded norms of the error; ``None`` where the bound is not finite (vacuous)."""

    l2_space_time: float | None = None
    l2_final_time: float | None = None
    l2_space: float | None = None
    log10_l2_space_time: float | None = None
    log10_l2_final_time: float | None = None


class TimeProfile(BaseModel):
    """``l2_error_bound[k]`` bounds the spatial L2 norm of the error at ``t[k]``."""

    t: list[float]
    l2_error_bound: list[float | None]


class Term(BaseModel):
    """One summand of the bound (its contribution to the squared final-time bound)."""

    name: str
    symbol: str
    value: float | None
    formula: str
    rigor: Rigor
    share_final_time: float | None = None
    share_space_time: float | None = None
    detail: str | None = None


class Constant(BaseModel):
    """A stability constant: expression, value, and how it was derived."""

    name: str
    symbol: str
    expression: str
    latex: str | None = None
    value: float | None
    derivation: list[str]
    rigor: Rigor | None = None
    reference: str | None = None


class Provenance(BaseModel):
    """Where the certificate came from."""

    model_config = ConfigDict(extra="allow")

    service_version: str
    libraries: dict[str, str]
    problem_sha256: str
    inputs_sha256: str
    plan_id: str | None
    theorem: str
    created_at: str
    arrays_sha256: dict[str, str] = Field(default_factory=dict)


class Certificate(BaseModel):
    """A stored certificate (immutable)."""

    model_config = ConfigDict(extra="allow")

    id: str
    status: Status
    family: str
    problem_id: str | None = None
    bound: Bound
    time_profile: TimeProfile | None
    terms: list[Term]
    constants: list[Constant]
    warnings: list[str]
    hypotheses: list[str] = Field(default_factory=list)
    rigor: Rigor | None = None
    vacuous_from: float | None = None
    model: ModelInfo | None = None
    provenance: Provenance
    regularity: dict[str, Any] = Field(default_factory=dict)


class CertificateSummary(BaseModel):
    """One row of the certificate list."""

    id: str
    status: Status
    family: str
    created_at: str
    model_name: str | None = None
    model_version: str | None = None
    project: str | None = None
    bound: Bound | None = None


class CertificatePage(BaseModel):
    """Body of ``GET /v1/certificates``."""

    items: list[CertificateSummary]
    next_cursor: str | None = None


class ArchiveMetadata(BaseModel):
    """Body of ``GET /v1/certificates/{id}/archive``: the stored residual archive."""

    certificate_id: str
    codec: str
    sha256: str = Field(description="SHA-256 of the archive bytes as stored")
    size_bytes: int
    created_at: str


class VerifyRequest(BaseModel):
    """Optional body of ``POST /v1/certificates/{id}/verify``."""

    model_config = ConfigDict(extra="forbid")

    rtol: Number = Field(
        default=1e-12,
        ge=0.0,
        le=1.0,
        description="numbers that differ by at most rtol * max(|stored|, |recomputed|) count "
        "as equal (0: exact). The default absorbs the last-digit noise of floating-point "
        "sums, which depends on memory alignment; byte_identical tells exact equality.",
    )


class Difference(BaseModel):
    """One field where the stored certificate and its recomputation disagree."""

    path: str = Field(description="e.g. 'bound.l2_space_time', 'terms[2].value'; '$' is the root")
    kind: Literal["changed", "added", "removed"] = Field(
        description="changed: both have the field; added: only the recomputation; "
        "removed: only the stored certificate"
    )
    stored: Any = None
    recomputed: Any = None


class RecomputeError(BaseModel):
    """Why the running version refused to recompute (its problem+json code and detail)."""

    code: str
    detail: str
    field: str | None = None


class VerificationReport(BaseModel):
    """Body of ``POST /v1/certificates/{id}/verify``."""

    certificate_id: str
    matches: bool = Field(
        description="the recomputation equals the stored certificate outside the ignored fields"
    )
    byte_identical: bool = Field(description="the two canonical documents are the same bytes")
    # stored_* fields are copied from the stored document as they are (Any: a document
    # altered in the database is reported, not refused)
    stored_status: Any = None
    recomputed_status: str | None = None
    stored_bound: Any = Field(default=None, description="'bound' as stored")
    recomputed_bound: dict[str, float | None] | None = None
    recomputed_id: str | None = Field(
        default=None,
        description="the id the running version gives these inputs (it hashes the version)",
    )
    stored_service_version: Any = None
    running_service_version: str
    differences: list[Difference]
    differences_total: int = Field(description="all differences (the list stops at 100)")
    max_relative_difference: float = Field(
        description="largest |stored - recomputed| / max(|stored|, |recomputed|) over the "
        "numbers compared, within rtol or not (0 when all are equal)"
    )
    ignored: list[str] = Field(description="paths left out of the comparison")
    rtol: float
    error: RecomputeError | None = None
    archive: ArchiveMetadata
    verified_at: str
