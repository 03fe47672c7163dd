"""Residual archives and re-verification: what ``certificates.py`` calls, without HTTP.

* :func:`archive_residuals` stores the decoded float64 residuals of a certificate and
  everything its id hashes (problem, plan spec, regularity, model, quadrature options,
  project), in the format of :mod:`boundsvc.store._archive`.
* :func:`verification_report` recomputes a certificate from its archive with the running
  version and compares the two documents field by field.

What the comparison ignores (docs/api.md, *Re-verification*): ``provenance.created_at``
(the recomputation reuses the stored time anyway), ``provenance.service_version`` and
``provenance.libraries`` (reported separately); and, only when the running version differs
from the stored one, ``id`` and ``provenance.inputs_sha256``, which hash the version.  The
residual digests (``provenance.arrays_sha256``) are compared: they tie the archive to the
certificate.
"""

from __future__ import annotations

import datetime as dt
import json
from collections.abc import Mapping
from typing import Any

from pydantic import ValidationError

from api_schemas import CertificateRequest, ModelInfo, ProblemSpec, QuadratureOptions
from boundsvc import __version__
from boundsvc.certify import CertificateDocument, build_plan, certify, derive
from boundsvc.errors import BoundsvcError
from boundsvc.families import Classified
from boundsvc.fields import FIELDS_PREFIX, field_arrays, split_field_arrays
from boundsvc.quadrature import Plan
from boundsvc.residuals import validate_residuals
from boundsvc.store import (
    ARCHIVE_CODEC,
    ArchiveContents,
    ArchiveInfo,
    Store,
    StoredCertificate,
    encode_residual_archive,
)

__all__ = [
    "ALWAYS_IGNORED",
    "MAX_DIFFERENCES",
    "VERSION_IGNORED",
    "archive_residuals",
    "compare_documents",
    "verification_report",
]

#: Paths never compared (reported elsewhere in the report, or equal by construction).
ALWAYS_IGNORED: tuple[str, ...] = (
    "provenance.created_at",
    "provenance.libraries",
    "provenance.service_version",
)
#: Paths that hash the service version: compared only when the versions agree.
VERSION_IGNORED: tuple[str, ...] = ("id", "provenance.inputs_sha256")
#: The report lists at most this many differences (``differences_total`` counts them all).
MAX_DIFFERENCES = 100
_ROOT = "$"


def archive_residuals(
    store: Store,
    certificate_id: str,
    *,
    problem: ProblemSpec,
    problem_id: str,
    plan: Plan,
    classified: Classified,
    body: CertificateRequest,
    residuals: Mapping[str, object],
    project: str,
    fields: Mapping[str, Mapping[str, object]] | None = None,
) -> ArchiveInfo:
    """Store the archive of a stored certificate (once: an existing archive is kept).

    The residuals were validated by :func:`boundsvc.certify.certify` already; decoding them
    again gives the very float64 arrays the bound was computed from.
    """
    existing = store.archive_info(certificate_id)
    if existing is not None:
        return existing
    sent_fields = fields or {}
    needed = [c for c in classified.components() if c not in sent_fields]
    arrays, _ = validate_residuals(plan, residuals, needed, len(classified.problem.unknowns))
    # fields mode: the model's fields are archived as sent (``fields.<component>.<name>``),
    # so that a recomputation forms the residuals again from them
    arrays.update(field_arrays(plan, sent_fields))
    request = {
        "problem": problem.model_dump(mode="json"),
        "problem_id": problem_id,
        "plan_spec": dict(plan.spec),
        "plan_id": plan.plan_id,
        "regularity": {k: body.regularity[k] for k in sorted(body.regularity)},
        "model": body.model.model_dump(mode="json") if body.model is not None else None,
        "quadrature": (
            body.quadrature.model_dump(mode="json") if body.quadrature is not None else None
        ),
        "project": project,
    }
    blob = encode_residual_archive(
        certificate_id=certificate_id,
        service_version=__version__,
        request=json.loads(json.dumps(request, allow_nan=False)),
        arrays=arrays,
    )
    stored = store.put_archive(certificate_id, blob, ARCHIVE_CODEC)
    return ArchiveInfo(
        certificate_id=certificate_id,
        codec=stored.codec,
        sha256=stored.sha256,
        size_bytes=len(stored.blob),
        created_at=stored.created_at,
    )


# ----------------------------------------------------------------------------- recompute


def _created_at(document: Any) -> dt.datetime | None:
    try:
        when = dt.datetime.fromisoformat(document["provenance"]["created_at"])
    except (KeyError, TypeError, ValueError):
        return None
    return when if when.tzinfo is not None else None


def recompute(contents: ArchiveContents, stored_document: Any) -> CertificateDocument:
    """The certificate the running version computes from an archive.

    Raises :class:`BoundsvcError` when the running version refuses the inputs (a 4xx the
    report carries), ``ValidationError`` when the archived request no longer fits the schema.
    """
    request = contents.request
    problem = ProblemSpec.model_validate(request["problem"])
    classified = derive(problem)
    plan = build_plan(classified, request["plan_spec"])
    model = ModelInfo.model_validate(request["model"]) if request.get("model") else None
    quadrature = (
        QuadratureOptions.model_validate(request["quadrature"])
        if request.get("quadrature") is not None
        else None
    )
    residuals = {k: v for k, v in contents.arrays.items() if not k.startswith(FIELDS_PREFIX)}
    fields = split_field_arrays(contents.arrays)
    return certify(
        classified,
        str(request["problem_id"]),
        plan,
        dict(request["regularity"]),
        residuals,
        model,
        fields=fields or None,
        quadrature=quadrature,
        project=request.get("project"),
        now=_created_at(stored_document),
    )


# ----------------------------------------------------------------------------- compare


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


class _Comparison:
    """Collects the differences of two documents and the largest relative difference."""

    def __init__(self, ignored: frozenset[str], rtol: float) -> None:
        self.ignored = ignored
        self.rtol = rtol
        self.differences: list[dict[str, Any]] = []
        self.max_relative = 0.0

    def same_leaf(self, a: Any, b: Any) -> bool:
        if _is_number(a) and _is_number(b):
            if a == b:
                return True
            scale = max(abs(a), abs(b))
            relative = abs(a / scale - b / scale)  # <= 2, and no overflow
            self.max_relative = max(self.max_relative, relative)
            return relative <= self.rtol
        return type(a) is type(b) and bool(a == b)

    def add(self, path: str, kind: str, stored: Any, recomputed: Any) -> None:
        self.differences.append(
            {"path": path, "kind": kind, "stored": stored, "recomputed": recomputed}
        )

    def walk(self, a: Any, b: Any, path: str) -> None:
        if path in self.ignored:
            return
        if isinstance(a, dict) and isinstance(b, dict):
            for key in list(a) + [k for k in b if k not in a]:
                child = str(key) if path == _ROOT else f"{path}.{key}"
                if child in self.ignored:
                    continue
                if key not in b:
                    self.add(child, "removed", a[key], None)
                elif key not in a:
                    self.add(child, "added", None, b[key])
                else:
                    self.walk(a[key], b[key], child)
        elif isinstance(a, list) and isinstance(b, list):
            for i in range(max(len(a), len(b))):
                child = f"{path}[{i}]"
                if i >= len(b):
                    self.add(child, "removed", a[i], None)
                elif i >= len(a):
                    self.add(child, "added", None, b[i])
                else:
                    self.walk(a[i], b[i], child)
        elif not self.same_leaf(a, b):
            self.add(path, "changed", a, b)


def compare_documents(
    stored: Any, recomputed: Any, ignored: frozenset[str] = frozenset(), rtol: float = 0.0
) -> tuple[list[dict[str, Any]], float]:
    """Every difference between two JSON documents (in the stored document's order), and
    the largest relative difference of the numbers compared.

    ``ignored`` paths (and everything below them) are skipped; numbers within ``rtol``
    (relative to the larger magnitude) count as equal; ``1`` and ``1.0`` are equal, ``true``
    and ``1`` are not.
    """
    comparison = _Comparison(ignored, rtol)
    comparison.walk(stored, recomputed, _ROOT)
    return comparison.differences, comparison.max_relative


def _field(document: Any, *keys: str) -> Any:
    for key in keys:
        if not isinstance(document, dict):
            return None
        document = document.get(key)
    return document


def _iso(when: dt.datetime) -> str:
    if when.tzinfo is None:
        when = when.replace(tzinfo=dt.UTC)
    return when.isoformat(timespec="milliseconds")


def archive_json(info: ArchiveInfo) -> dict[str, Any]:
    """The ``ArchiveMetadata`` body of one archive."""
    return {
        "certificate_id": info.certificate_id,
        "codec": info.codec,
        "sha256": info.sha256,
        "size_bytes": info.size_bytes,
        "created_at": _iso(info.created_at),
    }


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not JSON")


def verification_report(
    stored: StoredCertificate, info: ArchiveInfo, contents: ArchiveContents, rtol: float
) -> dict[str, Any]:
    """Recompute ``stored`` from its archive and say whether, and where, the two differ."""
    try:  # a document altered in the database may hold anything, even Infinity
        stored_doc: Any = json.loads(stored.document, parse_constant=_no_constant)
    except ValueError:
        stored_doc = None
    stored_version = _field(stored_doc, "provenance", "service_version")
    ignored = set(ALWAYS_IGNORED)
    if stored_version != __version__:
        ignored.update(VERSION_IGNORED)
    error: dict[str, Any] | None = None
    recomputed_doc: Any = None
    body: bytes | None = None
    try:
        doc = recompute(contents, stored_doc)
        body = doc.body
        recomputed_doc = json.loads(doc.body)
    except BoundsvcError as exc:
        if exc.status >= 500:  # the service is busy: not an answer about the certificate
            raise
        error = {"code": exc.code, "detail": exc.detail, "field": exc.field}
    except ValidationError as exc:
        first = exc.errors()[0]
        error = {
            "code": "validation_error",
            "detail": f"the archived request no longer fits the schema: {first.get('msg')}",
            "field": ".".join(str(p) for p in first.get("loc", ())) or None,
        }
    differences: list[dict[str, Any]] = []
    max_relative = 0.0
    if error is None and not isinstance(stored_doc, dict):
        differences = [
            {"path": _ROOT, "kind": "changed", "stored": None, "recomputed": recomputed_doc}
        ]
    elif error is None:
        differences, max_relative = compare_documents(
            stored_doc, recomputed_doc, frozenset(ignored), rtol
        )
    return {
        "certificate_id": stored.id,
        "matches": error is None and not differences,
        "byte_identical": body is not None and body == stored.document,
        "stored_status": _field(stored_doc, "status"),
        "recomputed_status": _field(recomputed_doc, "status"),
        "stored_bound": _field(stored_doc, "bound"),
        "recomputed_bound": _field(recomputed_doc, "bound"),
        "recomputed_id": _field(recomputed_doc, "id"),
        "stored_service_version": stored_version,
        "running_service_version": __version__,
        "differences": differences[:MAX_DIFFERENCES],
        "differences_total": len(differences),
        "max_relative_difference": max_relative,
        "ignored": sorted(ignored),
        "rtol": rtol,
        "error": error,
        "archive": archive_json(info),
        "verified_at": _iso(dt.datetime.now(dt.UTC)),
    }
