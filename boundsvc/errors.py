"""Domain exceptions of the core. ``boundsvc.api.errors`` maps each to one HTTP status.

Every exception carries a stable machine ``code`` (listed in ``docs/errors.md``), a human
``detail``, and the request ``field`` at fault when there is one.
"""

from __future__ import annotations


class BoundsvcError(Exception):
    """Base class. Becomes HTTP ``status`` (422 unless a subclass says otherwise)."""

    status = 422
    title = "Unprocessable request"

    def __init__(
        self,
        code: str,
        detail: str,
        field: str | None = None,
        *,
        position: int | None = None,
        index: int | None = None,
    ) -> None:
        super().__init__(detail)
        self.code = code
        self.detail = detail
        self.field = field
        self.position = position
        self.index = index


class ProblemNotCovered(BoundsvcError):
    """No family of the catalogue covers the equation (HTTP 422, code ``problem_not_covered``)."""

    title = "No stability theorem covers this problem"

    def __init__(self, detail: str, reasons: dict[str, str], field: str = "problem.equation"):
        super().__init__("problem_not_covered", detail, field)
        self.reasons = reasons


class ProblemInvalid(BoundsvcError):
    """The problem text cannot be understood (HTTP 422: parse errors, bad parameters)."""

    title = "Invalid problem"


class RegularityError(BoundsvcError):
    """A regularity value is missing, unknown, negative or unparsable (HTTP 422)."""

    title = "Invalid regularity"


class ResidualError(BoundsvcError):
    """A residual array is malformed: wrong length, non-finite, bad encoding (HTTP 422)."""

    title = "Invalid residuals"


class PlanInvalid(BoundsvcError):
    """A plan request cannot be honoured (HTTP 422, code ``plan_invalid``)."""

    title = "Invalid plan"


class NotFound(BoundsvcError):
    """A referenced object does not exist or is not visible (HTTP 404)."""

    status = 404
    title = "Not found"


class TooComplex(BoundsvcError):
    """Symbolic work exceeded its budget (HTTP 422, code ``problem_too_complex``)."""

    title = "Input too complex"
