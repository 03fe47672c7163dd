"""Binary transports of residuals: one ``.npz`` body, or raw little-endian octets.

``.npz`` bodies are read with ``allow_pickle=False``; octet-stream bodies are split by the
plan's sizes without copying (``np.frombuffer``).
"""

from __future__ import annotations

import base64
import binascii
import io
import json
import zipfile
from typing import Any

import numpy as np
from pydantic import ValidationError

from api_schemas import CertificateRequest
from boundsvc.errors import BoundsvcError, ResidualError
from boundsvc.quadrature import Plan

NPZ_TYPES = ("application/x-npz", "application/npz")
OCTET = "application/octet-stream"
_DTYPES = {"float64": "<f8", "float32": "<f4"}


def _request_from(obj: Any, where: str) -> CertificateRequest:
    if not isinstance(obj, dict):
        raise BoundsvcError("validation_error", f"{where} must be a JSON object", where)
    obj = dict(obj)
    obj.pop("layout", None)
    obj.setdefault("residuals", {})
    try:
        return CertificateRequest.model_validate(obj)
    except ValidationError as exc:
        first = exc.errors()[0]
        loc = ".".join(str(p) for p in first.get("loc", ()))
        raise BoundsvcError(
            "validation_error", f"{loc}: {first.get('msg')}", loc or where
        ) from None


def decode_upload(
    content_type: str, raw: bytes, header: str | None
) -> tuple[CertificateRequest, dict[str, Any]]:
    """The request and the arrays of a binary upload."""
    if content_type in NPZ_TYPES:
        return _decode_npz(raw)
    if content_type == OCTET:
        if not header:
            raise BoundsvcError(
                "validation_error",
                "an octet-stream upload needs the "
                "X-Boundsvc-Request header (base64url of the request JSON)",
                "X-Boundsvc-Request",
            )
        try:
            obj = json.loads(base64.urlsafe_b64decode(header + "=" * (-len(header) % 4)))
        except (binascii.Error, ValueError, UnicodeDecodeError) as exc:
            raise BoundsvcError(
                "validation_error", "X-Boundsvc-Request is not base64url JSON", "X-Boundsvc-Request"
            ) from exc
        layout = obj.get("layout") if isinstance(obj, dict) else None
        return _request_from(obj, "X-Boundsvc-Request"), {"__raw__": raw, "__layout__": layout}
    raise BoundsvcError(
        "validation_error",
        f"content type {content_type!r} is not accepted here; send "
        "application/x-npz or application/octet-stream",
        "content-type",
    )


def _decode_npz(raw: bytes) -> tuple[CertificateRequest, dict[str, Any]]:
    try:
        archive = np.load(io.BytesIO(raw), allow_pickle=False)
    except (ValueError, OSError, zipfile.BadZipFile, EOFError) as exc:
        raise ResidualError(
            "residual_encoding", "the body is not a readable .npz archive", "body"
        ) from exc
    with archive:
        names = list(archive.files)
        if "request" not in names:
            raise BoundsvcError(
                "validation_error",
                "the .npz needs a 'request' member (the "
                "request JSON as uint8 bytes or a 0-d string)",
                "request",
            )
        try:
            member = archive["request"]
            text = member.tobytes().decode() if member.dtype == np.uint8 else str(member[()])
            obj = json.loads(text)
        except (ValueError, UnicodeDecodeError) as exc:
            raise BoundsvcError(
                "validation_error", "the 'request' member is not JSON", "request"
            ) from exc
        arrays: dict[str, Any] = {}
        for name in names:
            if name == "request":
                continue
            try:
                arrays[name] = archive[name]
            except ValueError as exc:
                raise ResidualError(
                    "residual_encoding",
                    f"{name}: cannot be read without pickle (object arrays are refused)",
                    f"residuals.{name}",
                ) from exc
    return _request_from(obj, "request"), arrays


def split_octets(raw: bytes, plan: Plan, layout: Any, n_equations: int) -> dict[str, Any]:
    """Cut a raw body into components: ``layout`` is a list of ``{"component", "dtype"}`` in
    body order (default: every plan component in plan order, float64)."""
    if layout is None:
        layout = [{"component": name, "dtype": "float64"} for name in plan.components]
    if not isinstance(layout, list):
        raise BoundsvcError("validation_error", "layout must be a list", "layout")
    out: dict[str, Any] = {}
    offset = 0
    for i, item in enumerate(layout):
        if not isinstance(item, dict) or item.get("component") not in plan.components:
            raise ResidualError(
                "residual_unknown_component",
                f"layout entry {i} names no component of the plan",
                "layout",
            )
        dtype = _DTYPES.get(str(item.get("dtype", "float64")))
        if dtype is None:
            raise ResidualError(
                "residual_dtype", f"layout entry {i}: dtype must be float64 or float32", "layout"
            )
        name = item["component"]
        count = plan.components[name].size * n_equations
        size = count * np.dtype(dtype).itemsize
        if offset + size > len(raw):
            raise ResidualError(
                "residual_length",
                f"{name}: the body ends after {len(raw)} bytes; {name} needs "
                f"{size} bytes from offset {offset}",
                f"residuals.{name}",
                index=(len(raw) - offset) // np.dtype(dtype).itemsize,
            )
        arr = np.frombuffer(raw, dtype=dtype, count=count, offset=offset)
        out[name] = arr.reshape(-1, n_equations) if n_equations > 1 else arr
        offset += size
    if offset != len(raw):
        raise ResidualError(
            "residual_length",
            f"the body has {len(raw) - offset} bytes more than the layout describes",
            "body",
        )
    return out
