"""Binary transports of residuals: one ``.npz`` body, or raw little-endian octets.

``.npz`` bodies are read with ``allow_pickle=False``; their uncompressed members (what
``np.savez`` writes) become views into the body after a CRC-32 check, compressed ones are
read. Octet-stream bodies are split by the plan's sizes without copying (``np.frombuffer``).
"""

from __future__ import annotations

import base64
import binascii
import io
import json
import zipfile
import zlib
from typing import Any

import numpy as np
from pydantic import ValidationError
from starlette.requests import Request

from api_schemas import CertificateRequest
from boundsvc.errors import BoundsvcError, ResidualError
from boundsvc.quadrature import Plan

NPZ_TYPES = ("application/x-npz", "application/npz")
OCTET = "application/octet-stream"
#: What reading a damaged member of a zip archive raises (CRC, deflate stream, truncation,
#: unknown compression method or zip version, encryption flag); found by fuzz/fuzz_request.py,
#: each was a 500.
_DAMAGED_ZIP = (
    zipfile.BadZipFile,
    zlib.error,
    OSError,
    EOFError,
    NotImplementedError,
    RuntimeError,
)
_DTYPES = {"float64": "<f8", "float32": "<f4"}


async def read_body(request: Request) -> bytearray:
    """The whole request body, appended chunk by chunk to one growing buffer.

    Starlette's ``request.body()`` keeps the list of chunks and joins them, so the body exists
    twice at its peak. Here each chunk is appended and dropped: the peak is about one body
    (CPython over-allocates a growing ``bytearray`` and glibc's ``realloc`` remaps large
    blocks instead of copying them; measured: 78 MB of peak for an 80 MB body, faster than
    filling a buffer preallocated from ``Content-Length``, which would also commit memory
    for a declared size before any byte has arrived). The size limit is enforced around this
    (``BodyLimit`` middleware).
    """
    buf = bytearray()
    async for chunk in request.stream():
        buf += chunk
    return buf


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
    content_type: str, raw: bytes | bytearray, header: str | None
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


class _BufferReader(io.RawIOBase):
    """A read-only, seekable file over a buffer without copying it (``io.BytesIO`` copies a
    ``bytearray``); what ``zipfile`` and ``np.load`` need."""

    def __init__(self, data: bytes | bytearray) -> None:
        super().__init__()
        self._view = memoryview(data).cast("B")
        self._pos = 0

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return True

    def readinto(self, buffer: Any) -> int:
        out = memoryview(buffer).cast("B")
        n = max(0, min(len(out), len(self._view) - self._pos))
        out[:n] = self._view[self._pos : self._pos + n]
        self._pos += n
        return n

    def seek(self, offset: int, whence: int = io.SEEK_SET) -> int:
        base = {io.SEEK_SET: 0, io.SEEK_CUR: self._pos, io.SEEK_END: len(self._view)}[whence]
        self._pos = max(0, base + offset)
        return self._pos

    def tell(self) -> int:
        return self._pos


_LOCAL_HEADER = 30  # fixed part of a zip local file header
_NPY_HEADER_MAX = 1 << 16


def _stored_member(raw: bytes | bytearray, info: zipfile.ZipInfo) -> np.ndarray | None:
    """The array of an uncompressed (``np.savez``) member as a view into the body, its
    CRC-32 checked like ``zipfile`` does; None when the member needs the general reader."""
    if info.compress_type != zipfile.ZIP_STORED or info.flag_bits & 0x1:
        return None
    view = memoryview(raw).cast("B")
    at = info.header_offset
    local = bytes(view[at : at + _LOCAL_HEADER])
    if len(local) < _LOCAL_HEADER or local[:4] != b"PK\x03\x04":
        return None
    start = at + _LOCAL_HEADER + int.from_bytes(local[26:28], "little")
    start += int.from_bytes(local[28:30], "little")
    end = start + info.compress_size
    if end > len(view) or zlib.crc32(view[start:end]) != info.CRC:
        raise zipfile.BadZipFile(f"bad CRC-32 for {info.filename}")
    head = io.BytesIO(bytes(view[start : min(end, start + _NPY_HEADER_MAX)]))
    try:
        version = np.lib.format.read_magic(head)
        if version == (1, 0):
            shape, fortran, dtype = np.lib.format.read_array_header_1_0(head)
        elif version in ((2, 0), (3, 0)):
            shape, fortran, dtype = np.lib.format.read_array_header_2_0(head)
        else:
            return None
    except ValueError:
        return None
    if dtype.hasobject:
        raise ValueError("object arrays need pickle")
    count = int(np.prod(shape, dtype=np.int64))
    offset = start + head.tell()
    if offset + count * dtype.itemsize != end:
        return None
    arr = np.frombuffer(raw, dtype=dtype, count=count, offset=offset)
    return arr.reshape(shape, order="F" if fortran else "C")


def _decode_npz(raw: bytes | bytearray) -> tuple[CertificateRequest, dict[str, Any]]:
    try:
        archive = np.load(_BufferReader(raw), allow_pickle=False)
    except (ValueError, *_DAMAGED_ZIP) as exc:
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
            if isinstance(member, bytes):  # a member stored without ".npy" (found by fuzz/)
                text = member.decode()
            elif member.dtype == np.uint8:
                text = member.tobytes().decode()
            else:
                text = str(member[()])
            obj = json.loads(text)
        except (ValueError, UnicodeDecodeError) as exc:
            raise BoundsvcError(
                "validation_error", "the 'request' member is not JSON", "request"
            ) from exc
        except _DAMAGED_ZIP as exc:
            raise ResidualError(
                "residual_encoding", "the 'request' member of the archive is damaged", "request"
            ) from exc
        arrays: dict[str, Any] = {}
        for name in names:
            if name == "request":
                continue
            try:
                info = archive.zip.NameToInfo.get(name + ".npy")
                stored = _stored_member(raw, info) if info is not None else None
                # uncompressed members are views into the body; others are read (a copy)
                arrays[name] = stored if stored is not None else archive[name]
            except ValueError as exc:
                raise ResidualError(
                    "residual_encoding",
                    f"{name}: cannot be read without pickle (object arrays are refused)",
                    f"residuals.{name}",
                ) from exc
            except _DAMAGED_ZIP as exc:
                raise ResidualError(
                    "residual_encoding",
                    f"{name}: the archive member is damaged",
                    f"residuals.{name}",
                ) from exc
    return _request_from(obj, "request"), arrays


def split_octets(
    raw: bytes | bytearray, plan: Plan, layout: Any, n_equations: int
) -> dict[str, Any]:
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
