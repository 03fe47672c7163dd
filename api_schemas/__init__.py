"""Pydantic models of the boundsvc wire format, shared by the server and the client.

This package depends on pydantic only (no numpy, sympy or server code), so the client can use
it without pulling the server's scientific stack.
"""

from api_schemas._certificate import (
    ArchiveMetadata,
    Bound,
    Certificate,
    CertificatePage,
    CertificateRequest,
    CertificateSummary,
    Constant,
    Difference,
    Provenance,
    QuadratureOptions,
    RecomputeError,
    Term,
    TimeProfile,
    VerificationReport,
    VerifyRequest,
)
from api_schemas._common import ModelInfo, ProblemDetails, ProblemFieldError
from api_schemas._family import FamilyInfo, FamilyList
from api_schemas._plan import InlinePlanComponent, PlanComponent, PlanRequest, PlanResponse
from api_schemas._problem import (
    BoundaryKind,
    ProblemRequest,
    ProblemResponse,
    ProblemSpec,
    RegularityRequirement,
)
from api_schemas._residuals import EncodedArray, ResidualValues

__all__ = [
    "ArchiveMetadata",
    "Bound",
    "BoundaryKind",
    "Certificate",
    "CertificatePage",
    "CertificateRequest",
    "CertificateSummary",
    "Constant",
    "Difference",
    "EncodedArray",
    "FamilyInfo",
    "FamilyList",
    "InlinePlanComponent",
    "ModelInfo",
    "PlanComponent",
    "PlanRequest",
    "PlanResponse",
    "ProblemDetails",
    "ProblemFieldError",
    "ProblemRequest",
    "ProblemResponse",
    "ProblemSpec",
    "Provenance",
    "QuadratureOptions",
    "RecomputeError",
    "RegularityRequirement",
    "ResidualValues",
    "Term",
    "TimeProfile",
    "VerificationReport",
    "VerifyRequest",
]
