"""Coverage-guided fuzzing of the request decoders: JSON bodies, residual arrays, uploads.

Each input is tried as (1) a ``POST /v1/certificates`` JSON body (``CertificateRequest``
validation, then every residual component through ``decode_values`` with 1 and 2 equations),
and (2) a binary upload (``decode_upload``: ``.npz`` and octet-stream with the bytes as the
base64url request header).  Each must succeed or raise pydantic's ``ValidationError`` or our
``BoundsvcError`` (which the API maps to a 4xx) within the budget; any other exception would
be a 500.  Run: ``make fuzz`` or ``python -m fuzz.fuzz_request``.
"""

from __future__ import annotations

import base64
import contextlib
from typing import Any

from fuzz._common import run

_M: dict[str, Any] = {}


def setup() -> None:
    from pydantic import ValidationError

    from api_schemas import CertificateRequest
    from boundsvc.api.routes._transport import decode_upload
    from boundsvc.errors import BoundsvcError
    from boundsvc.residuals import decode_values

    _M.update(
        request=CertificateRequest,
        refused=(ValidationError, BoundsvcError),
        decode_values=decode_values,
        decode_upload=decode_upload,
    )


def check(data: bytes) -> None:
    refused = _M["refused"]
    try:
        body = _M["request"].model_validate_json(data)
    except refused:
        body = None
    if body is not None:
        for name, values in body.residuals.items():
            for equations in (1, 2):
                with contextlib.suppress(refused):
                    _M["decode_values"](name, values, equations)
    header = base64.urlsafe_b64encode(data[:4096]).decode().rstrip("=")
    for content_type, header_value in (
        ("application/x-npz", None),
        ("application/octet-stream", header),
    ):
        with contextlib.suppress(refused):
            _M["decode_upload"](content_type, data, header_value)


if __name__ == "__main__":
    run("request", check, setup)
