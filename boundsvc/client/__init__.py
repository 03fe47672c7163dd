"""The boundsvc Python client: HTTP clients, residual adapters and a training-loop helper.

Light by design: httpx, numpy and pydantic only (no sympy, scipy, or server code; PyTorch only
when :mod:`boundsvc.client.torch` is used).

>>> from boundsvc.client import BoundsvcClient, PlanEvaluator  # doctest: +SKIP
>>> with BoundsvcClient() as client:  # $BOUNDSVC_URL, $BOUNDSVC_API_KEY  # doctest: +SKIP
...     plan = client.plan(problem, points={"t": 32, "x": 32})
...     residuals = PlanEvaluator.for_problem(net, problem).residuals(plan, operator, ...)
...     cert = client.certify(problem, plan, regularity, residuals, model={"name": "wave"})
"""

from boundsvc.client._async import AsyncBoundsvcClient
from boundsvc.client._http import (
    DEFAULT_TIMEOUT,
    DEFAULT_URL,
    BoundsvcClient,
    ComponentPoints,
    Plan,
    Report,
    RetryPolicy,
    encode_residuals,
)
from boundsvc.client.adapters import (
    FieldEvaluator,
    MLPFields,
    PlanEvaluator,
    residuals_from_fields,
)
from boundsvc.client.errors import BoundsvcClientError, ServiceUnavailable
from boundsvc.client.training import BoundRecord, CertifyEvery

__all__ = [
    "DEFAULT_TIMEOUT",
    "DEFAULT_URL",
    "AsyncBoundsvcClient",
    "BoundRecord",
    "BoundsvcClient",
    "BoundsvcClientError",
    "CertifyEvery",
    "ComponentPoints",
    "FieldEvaluator",
    "MLPFields",
    "Plan",
    "PlanEvaluator",
    "Report",
    "RetryPolicy",
    "ServiceUnavailable",
    "encode_residuals",
    "residuals_from_fields",
]
