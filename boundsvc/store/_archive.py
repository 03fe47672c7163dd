"""The residual archive format: what a certificate needs to be recomputed, compressed.

An archive is a ZIP file in numpy's ``.npz`` layout, so ``numpy.load(path,
allow_pickle=False)`` reads it without boundsvc:

* ``meta.json`` (UTF-8 JSON): ``format`` (``"boundsvc-residual-archive"``), ``version``
  (``1``), the ``certificate_id``, the ``service_version`` that wrote it, ``request`` (the
  problem as validated, its ``problem_id``, the canonical plan spec and ``plan_id``, the
  regularity, the model metadata, the quadrature options and the project: everything the
  certificate id hashes) and ``arrays`` (per component: dtype, shape, SHA-256 of the
  little-endian float64 bytes, as in ``provenance.arrays_sha256``);
* ``<component>.npy``: the decoded residuals of each component as little-endian float64,
  exactly the arrays the bound was computed from (float32 uploads after their rounding
  inflation), never a pickle.

Members are deflated at level 1 (residuals are nearly incompressible floats: level 6 costs
about twice the time for under 1 % more), with fixed timestamps, so that the same
certificate always gives byte-identical archives (an archive is stored once per certificate
and a repeated store must be a no-op).
"""

from __future__ import annotations

import hashlib
import io
import json
import zipfile
import zlib
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ._errors import ArchiveCorrupt

__all__ = [
    "ARCHIVE_CODEC",
    "ARCHIVE_FORMAT",
    "ArchiveContents",
    "decode_residual_archive",
    "encode_residual_archive",
]

#: The codec name stored beside every archive (``residual_archives.codec``).
ARCHIVE_CODEC = "npz-deflate/1"
ARCHIVE_FORMAT = "boundsvc-residual-archive"
_VERSION = 1
_META = "meta.json"
_EPOCH = (1980, 1, 1, 0, 0, 0)  # the earliest ZIP timestamp: archives are reproducible
_LEVEL = 1


@dataclass(frozen=True)
class ArchiveContents:
    """A decoded archive: ``meta`` (``meta.json``) and the float64 arrays per component."""

    meta: dict[str, Any]
    arrays: dict[str, NDArray[np.float64]]

    @property
    def request(self) -> dict[str, Any]:
        """What the certificate was computed from (problem, plan spec, regularity, ...)."""
        return dict(self.meta["request"])


def _member(name: str) -> zipfile.ZipInfo:
    info = zipfile.ZipInfo(name, date_time=_EPOCH)
    info.compress_type = zipfile.ZIP_DEFLATED
    info.external_attr = 0o644 << 16
    return info


def encode_residual_archive(
    *,
    certificate_id: str,
    service_version: str,
    request: Mapping[str, Any],
    arrays: Mapping[str, NDArray[np.float64]],
) -> bytes:
    """The archive bytes of one certificate (deterministic for the same inputs).

    ``request`` must be JSON-ready; ``arrays`` are the validated float64 residuals.
    """
    ordered = {name: np.ascontiguousarray(arrays[name], dtype="<f8") for name in sorted(arrays)}
    if _META.removesuffix(".json") in ordered:
        raise ValueError("a residual component may not be named 'meta'")
    meta = {
        "format": ARCHIVE_FORMAT,
        "version": _VERSION,
        "certificate_id": certificate_id,
        "service_version": service_version,
        "request": dict(request),
        "arrays": {
            name: {
                "dtype": "<f8",
                "shape": list(arr.shape),
                "sha256": hashlib.sha256(arr.tobytes()).hexdigest(),
            }
            for name, arr in ordered.items()
        },
    }
    text = json.dumps(meta, sort_keys=True, separators=(",", ":"), allow_nan=False)
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=_LEVEL) as zf:
        zf.writestr(_member(_META), text.encode(), compresslevel=_LEVEL)
        for name, arr in ordered.items():
            with zf.open(_member(f"{name}.npy"), "w", force_zip64=True) as out:
                np.lib.format.write_array(out, arr, allow_pickle=False)
    return buffer.getvalue()


def decode_residual_archive(blob: bytes, codec: str) -> ArchiveContents:
    """Read an archive; anything unreadable raises :class:`ArchiveCorrupt` (never a pickle).

    The arrays are checked against the SHA-256 recorded in ``meta.json``.
    """
    if codec != ARCHIVE_CODEC:
        raise ArchiveCorrupt(f"archive codec {codec!r} is not readable by this version")
    try:
        with zipfile.ZipFile(io.BytesIO(blob)) as zf:
            meta = json.loads(zf.read(_META).decode())
            if not isinstance(meta, dict) or meta.get("format") != ARCHIVE_FORMAT:
                raise ArchiveCorrupt("meta.json does not describe a boundsvc residual archive")
            if meta.get("version") != _VERSION:
                raise ArchiveCorrupt(f"archive version {meta.get('version')!r} is unknown")
            described = meta.get("arrays")
            if not isinstance(described, dict) or not isinstance(meta.get("request"), dict):
                raise ArchiveCorrupt("meta.json lacks 'arrays' or 'request'")
            arrays: dict[str, NDArray[np.float64]] = {}
            for name, spec in described.items():
                with zf.open(f"{name}.npy") as member:
                    arr = np.lib.format.read_array(member, allow_pickle=False)
                if arr.dtype != np.dtype("<f8") or list(arr.shape) != spec.get("shape"):
                    raise ArchiveCorrupt(f"{name}.npy does not have the recorded dtype and shape")
                if hashlib.sha256(arr.tobytes()).hexdigest() != spec.get("sha256"):
                    raise ArchiveCorrupt(f"{name}.npy fails its recorded SHA-256")
                arrays[name] = arr
    except ArchiveCorrupt:
        raise
    except (
        zipfile.BadZipFile,
        zlib.error,
        KeyError,
        ValueError,
        TypeError,
        OSError,
        EOFError,
        AttributeError,
    ) as exc:
        raise ArchiveCorrupt(f"the archive cannot be read: {type(exc).__name__}: {exc}") from exc
    return ArchiveContents(meta=meta, arrays=arrays)
