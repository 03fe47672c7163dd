"""The client's one exception type (and its subclass for an unreachable service).

Every failed call to the service raises :class:`BoundsvcClientError`, carrying what the
service's RFC 9457 problem+json body said. Arguments that are wrong before any request is made
(a residual that is not a number, an unknown plan file format) raise ``ValueError`` or
``TypeError`` as usual.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from api_schemas import ProblemFieldError

__all__ = ["BoundsvcClientError", "ServiceUnavailable"]


class BoundsvcClientError(Exception):
    """The service answered with an error (4xx/5xx), or could not be used.

    Attributes
    ----------
    status : int or None
        HTTP status; ``None`` when no response arrived (see :class:`ServiceUnavailable`).
    code : str
        The service's stable machine code (``"regularity_missing"``, ``"not_found"``, ...);
        ``"http_<status>"`` when the body was not problem+json, and ``"unreachable"`` /
        ``"retries_exhausted"`` for :class:`ServiceUnavailable`.
    detail : str
        The human-readable explanation.
    errors : list of ProblemFieldError
        The offending fields of a validation error (path, message, first bad index).
    request_id : str or None
        Quote it when reporting a 500.
    body : dict
        The whole decoded problem+json body (extension members such as ``reasons``).
    """

    def __init__(
        self,
        detail: str,
        *,
        status: int | None = None,
        code: str = "error",
        errors: Sequence[ProblemFieldError] = (),
        request_id: str | None = None,
        method: str | None = None,
        url: str | None = None,
        body: Mapping[str, Any] | None = None,
    ) -> None:
        self.status = status
        self.code = code
        self.detail = detail
        self.errors = list(errors)
        self.request_id = request_id
        self.method = method
        self.url = url
        self.body: dict[str, Any] = dict(body or {})
        super().__init__(self._message())

    def _message(self) -> str:
        where = f"{self.method} {self.url}: " if self.method and self.url else ""
        status = f"{self.status} " if self.status is not None else ""
        text = f"{where}{status}{self.code}: {self.detail}"
        for err in self.errors[:5]:
            index = f" (index {err.index})" if err.index is not None else ""
            text += f"\n  - {err.field}: {err.message}{index}"
        if self.request_id and (self.status is None or self.status >= 500):
            text += f"\n  request id: {self.request_id}"
        return text

    @property
    def retryable(self) -> bool:
        """Whether the same call may succeed later (outage, overload), not a refused input."""
        return self.status is None or self.status in (429, 502, 503, 504)


class ServiceUnavailable(BoundsvcClientError):
    """No usable answer: connection refused or timed out, or retries exhausted on 429/502-504."""
