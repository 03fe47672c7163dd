"""The synchronous client, and the wire logic it shares with the asynchronous one.

Everything that does not wait on the network lives here as plain functions: building each
request (:class:`_Call`), the retry policy, decoding answers and problem+json errors, and the
encoding of residual arrays. :class:`BoundsvcClient` and
:class:`boundsvc.client.AsyncBoundsvcClient` only differ in how they send.

Retry rules (the same for both clients):

* retried: connection failures (refused, reset before an answer, connect timeout), HTTP 429
  (after its ``Retry-After``), 502, 503 and 504;
* a ``POST`` is retried only when it carries an ``Idempotency-Key`` (the client makes one per
  logical call when ``idempotent=True``), so the service can recognise the repeat, or when it
  has no effect (``verify`` recomputes and stores nothing);
* a 409 ``idempotency_in_progress`` (the first attempt with that key still runs);
* nothing else: a 4xx is an answer, and a read timeout means the service may still be working.
"""

from __future__ import annotations

import base64
import datetime as dt
import email.utils
import json
import os
import random
import time
import uuid
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal, TypeAlias, TypeVar

import httpx
import numpy as np
import numpy.typing as npt
from pydantic import BaseModel, ValidationError

from api_schemas import (
    ArchiveMetadata,
    Certificate,
    CertificatePage,
    CertificateSummary,
    FamilyInfo,
    FamilyList,
    ModelInfo,
    PlanComponent,
    PlanResponse,
    ProblemDetails,
    ProblemResponse,
    ProblemSpec,
    VerificationReport,
)
from boundsvc import __version__
from boundsvc.client.errors import BoundsvcClientError, ServiceUnavailable

__all__ = [
    "DEFAULT_RETRY",
    "DEFAULT_TIMEOUT",
    "DEFAULT_URL",
    "BoundsvcClient",
    "ComponentPoints",
    "Plan",
    "Progress",
    "Report",
    "RetryPolicy",
    "encode_residuals",
]

FloatArray: TypeAlias = npt.NDArray[np.float64]
#: A problem: the typed model, or the same as a JSON-like mapping.
ProblemLike: TypeAlias = ProblemSpec | Mapping[str, Any]
#: A problem, or the ``problem_id`` of one the service has already stored.
ProblemRef: TypeAlias = ProblemLike | str
#: Residuals per component: numpy arrays, lists, or anything ``numpy.asarray`` takes.
ResidualsLike: TypeAlias = Mapping[str, npt.ArrayLike]
ModelLike: TypeAlias = ModelInfo | Mapping[str, Any]
#: ``progress(bytes_sent, bytes_total)`` during an upload.
Progress: TypeAlias = Callable[[int, int], None]
Encoding: TypeAlias = Literal["base64", "json"]

#: Where the client looks when neither the argument nor ``BOUNDSVC_URL`` says.
DEFAULT_URL = "http://127.0.0.1:8000"
#: Connect quickly or give up; a certificate's symbolic derivation may take a while to answer.
DEFAULT_TIMEOUT = httpx.Timeout(connect=5.0, read=120.0, write=60.0, pool=10.0)
_UPLOAD_CHUNK = 256 * 1024
#: The service's answer to a repeat of an idempotent call whose first attempt still runs.
IN_PROGRESS = "idempotency_in_progress"
_ModelT = TypeVar("_ModelT", bound=BaseModel)


# ---------------------------------------------------------------------------
# Retry policy
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class RetryPolicy:
    """How often and how long to wait before repeating a request.

    Parameters
    ----------
    max_retries : int
        Repeats after the first attempt (0 disables retries).
    backoff : float
        First wait in seconds; doubled per retry, with jitter in ``[0.5, 1]``, capped at
        ``max_backoff``.
    max_retry_after : float
        A ``Retry-After`` longer than this ends the retries at once (the error says how long
        the service asked to wait) rather than blocking the caller.
    """

    max_retries: int = 3
    backoff: float = 0.5
    max_backoff: float = 30.0
    max_retry_after: float = 120.0
    statuses: frozenset[int] = frozenset({429, 502, 503, 504})

    def __post_init__(self) -> None:
        if self.max_retries < 0:
            raise ValueError(f"max_retries must be >= 0, got {self.max_retries}")
        if self.backoff < 0 or self.max_backoff < 0:
            raise ValueError("backoff and max_backoff must be >= 0")

    def delay(self, attempt: int, retry_after: str | None = None) -> float | None:
        """Seconds to wait before retry number ``attempt + 1``; ``None`` to stop retrying."""
        if attempt >= self.max_retries:
            return None
        if retry_after is not None:
            wait = parse_retry_after(retry_after)
            if wait is not None:
                return wait if wait <= self.max_retry_after else None
        jitter = 0.5 + 0.5 * random.random()  # noqa: S311 - jitter, not cryptography
        return float(min(self.max_backoff, self.backoff * 2.0**attempt) * jitter)


#: The retry policy both clients use unless told otherwise.
DEFAULT_RETRY = RetryPolicy()


def parse_retry_after(value: str, now: dt.datetime | None = None) -> float | None:
    """Seconds from an HTTP ``Retry-After`` (delta-seconds or an HTTP date); ``None`` if bad."""
    text = value.strip()
    if text.isdigit():
        return float(text)
    try:
        when = email.utils.parsedate_to_datetime(text)
    except (TypeError, ValueError):
        return None
    if when.tzinfo is None:
        when = when.replace(tzinfo=dt.UTC)
    return max(0.0, (when - (now or dt.datetime.now(dt.UTC))).total_seconds())


def _problem_code(response: httpx.Response) -> str | None:
    try:
        body = response.json()
    except ValueError:
        return None
    code = body.get("code") if isinstance(body, dict) else None
    return code if isinstance(code, str) else None


def retry_delay(
    policy: RetryPolicy, call: _Call, response: httpx.Response, attempt: int
) -> float | None:
    """Seconds to wait before repeating ``call`` after ``response``; ``None``: do not.

    Besides 429/502/503/504, a 409 ``idempotency_in_progress`` is retried: the service says
    that the first attempt with this key is still running (and when to ask again).
    """
    if not call.retry_allowed:
        return None
    if response.status_code in policy.statuses or (
        response.status_code == 409
        and call.idempotency_key is not None
        and _problem_code(response) == IN_PROGRESS
    ):
        return policy.delay(attempt, response.headers.get("retry-after"))
    return None


def _is_connection_error(exc: httpx.TransportError) -> bool:
    """The request did not get an answer for reasons of the connection, not of the server's
    work: refused, reset before a response, or the connect/pool timeout."""
    return isinstance(
        exc,
        httpx.ConnectError | httpx.ConnectTimeout | httpx.PoolTimeout | httpx.RemoteProtocolError,
    )


# ---------------------------------------------------------------------------
# Requests
# ---------------------------------------------------------------------------


@dataclass
class _Call:
    """One logical call: the same method, path, body and keys on every attempt."""

    method: str
    path: str
    body: bytes | None = None
    params: dict[str, str | int] = field(default_factory=dict)
    idempotency_key: str | None = None
    progress: Progress | None = None
    accept: str = "application/json"
    #: a POST without effects on the service (retried like a GET)
    retry_safe: bool = False

    @property
    def retry_allowed(self) -> bool:
        return self.method == "GET" or self.retry_safe or self.idempotency_key is not None

    def headers(self) -> dict[str, str]:
        out = {
            "Accept": f"{self.accept}, application/problem+json",
            "X-Request-ID": uuid.uuid4().hex,
        }
        if self.body is not None:
            out["Content-Type"] = "application/json"
            out["Content-Length"] = str(len(self.body))
        if self.idempotency_key is not None:
            out["Idempotency-Key"] = self.idempotency_key
        return out

    def chunks(self) -> Iterator[bytes]:
        """The body in pieces, reporting progress (a fresh iterator per attempt)."""
        body = self.body or b""
        total = len(body)
        sent = 0
        if self.progress is not None:
            self.progress(0, total)
        for start in range(0, total, _UPLOAD_CHUNK):
            piece = body[start : start + _UPLOAD_CHUNK]
            sent += len(piece)
            yield piece
            if self.progress is not None:
                self.progress(sent, total)


def _json_bytes(body: Mapping[str, Any]) -> bytes:
    try:
        return json.dumps(body, allow_nan=False, separators=(",", ":")).encode()
    except ValueError as exc:
        raise ValueError(
            f"the request cannot be sent as JSON: {exc} (every number, e.g. a "
            "regularity value, must be finite)"
        ) from exc


def _idempotency(idempotent: bool, key: str | None) -> str | None:
    if key is not None:
        return key
    return uuid.uuid4().hex if idempotent else None


def _problem_json(problem: ProblemLike) -> dict[str, Any]:
    if isinstance(problem, ProblemSpec):
        return problem.model_dump(mode="json", exclude_none=True)
    if isinstance(problem, Mapping):
        return dict(problem)
    raise TypeError(f"a problem must be a ProblemSpec or a mapping, got {type(problem).__name__}")


def _problem_ref(problem: ProblemRef) -> dict[str, Any]:
    """``{"problem_id": ...}`` for a string, else ``{"problem": {...}}``."""
    if isinstance(problem, str):
        return {"problem_id": problem}
    return {"problem": _problem_json(problem)}


def _model_json(model: ModelLike | None) -> dict[str, Any] | None:
    if model is None:
        return None
    if isinstance(model, ModelInfo):
        return model.model_dump(mode="json", exclude_none=True)
    return ModelInfo.model_validate(dict(model)).model_dump(mode="json", exclude_none=True)


def encode_residuals(residuals: ResidualsLike, encoding: Encoding = "base64") -> dict[str, Any]:
    """The wire form of residual arrays.

    Parameters
    ----------
    residuals : mapping of str to array_like
        Component name -> values in the plan's point order: shape ``(n,)`` for one unknown,
        ``(n, m)`` for ``m`` equations.
    encoding : {"base64", "json"}
        ``"base64"`` (default) sends ``{"dtype": "float64", "encoding": "base64", "data": ...}``
        of the little-endian bytes in C order, exact and compact; ``"json"`` sends lists.

    Returns
    -------
    dict
        Ready for the ``residuals`` member of ``POST /v1/certificates``.
    """
    if encoding not in ("base64", "json"):
        raise ValueError(f"encoding must be 'base64' or 'json', got {encoding!r}")
    out: dict[str, Any] = {}
    for name, values in residuals.items():
        try:
            arr = np.asarray(values, dtype=np.float64)
        except (TypeError, ValueError) as exc:
            raise ValueError(f"residuals[{name!r}] is not an array of numbers: {exc}") from exc
        if arr.ndim == 2 and arr.shape[1] == 1:
            arr = arr[:, 0]
        if arr.ndim not in (1, 2):
            raise ValueError(
                f"residuals[{name!r}] must have shape (n,) or (n, equations), got {arr.shape}"
            )
        if encoding == "base64":
            data = np.ascontiguousarray(arr, dtype="<f8").tobytes()
            out[name] = {
                "dtype": "float64",
                "encoding": "base64",
                "data": base64.b64encode(data).decode("ascii"),
            }
        else:
            bad = np.flatnonzero(~np.isfinite(arr.reshape(arr.shape[0], -1)).all(axis=1))
            if bad.size:
                raise ValueError(
                    f"residuals[{name!r}] is not finite at index {int(bad[0])} "
                    "(JSON has no NaN or infinity)"
                )
            out[name] = arr.tolist()
    return out


def _regularity_json(regularity: Mapping[str, float | str]) -> dict[str, float | str]:
    out: dict[str, float | str] = {}
    for key, value in regularity.items():
        out[str(key)] = value if isinstance(value, str) else float(value)
    return out


def call_problem(
    problem: ProblemLike, regularity: Mapping[str, float | str] | None, idempotent: bool
) -> _Call:
    body: dict[str, Any] = {"problem": _problem_json(problem)}
    if regularity is not None:
        body["regularity"] = _regularity_json(regularity)
    return _Call(
        "POST", "/v1/problems", _json_bytes(body), idempotency_key=_idempotency(idempotent, None)
    )


#: ``POST /v1/plans`` fields beyond points and panels, passed through as given (see
#: :class:`api_schemas.PlanRequest`): Sobol/Monte Carlo sizes, grid weights, custom
#: components and components added on request (e.g. ``["boundary_t"]``).
PLAN_OPTIONS = ("n", "replicates", "seed", "weights", "components", "optional_components")


def call_plan(
    problem: ProblemRef,
    points: Mapping[str, int] | None,
    panels: Mapping[str, int] | None,
    rule: str,
    idempotent: bool,
    options: Mapping[str, Any] | None = None,
) -> _Call:
    body: dict[str, Any] = {
        **_problem_ref(problem),
        "rule": rule,
        "points": {k: int(v) for k, v in (points or {}).items()},
    }
    if panels:
        body["panels"] = {k: int(v) for k, v in panels.items()}
    for name, value in (options or {}).items():
        if name not in PLAN_OPTIONS:
            raise TypeError(
                f"plan() got an unexpected option {name!r}; "
                f"the options are {', '.join(PLAN_OPTIONS)}"
            )
        if value is not None:
            body[name] = list(value) if name == "optional_components" else value
    return _Call(
        "POST", "/v1/plans", _json_bytes(body), idempotency_key=_idempotency(idempotent, None)
    )


def call_certify(
    problem: ProblemRef,
    plan: Plan | str,
    regularity: Mapping[str, float | str],
    residuals: ResidualsLike,
    model: ModelLike | None,
    encoding: Encoding,
    idempotent: bool,
    idempotency_key: str | None,
    progress: Progress | None,
    archive: bool | None = None,
) -> _Call:
    plan_id = plan.plan_id if isinstance(plan, Plan) else str(plan)
    body: dict[str, Any] = {
        **_problem_ref(problem),
        "plan_id": plan_id,
        "regularity": _regularity_json(regularity),
        "residuals": encode_residuals(residuals, encoding),
    }
    model_json = _model_json(model)
    if model_json is not None:
        body["model"] = model_json
    if archive is not None:
        body["archive"] = bool(archive)
    return _Call(
        "POST",
        "/v1/certificates",
        _json_bytes(body),
        idempotency_key=_idempotency(idempotent, idempotency_key),
        progress=progress,
    )


def call_list(
    model: str | None,
    version: str | None,
    family: str | None,
    status: str | None,
    limit: int,
    cursor: str | None,
) -> _Call:
    params: dict[str, str | int] = {"limit": int(limit)}
    for key, value in (
        ("model", model),
        ("model_version", version),
        ("family", family),
        ("status", status),
        ("cursor", cursor),
    ):
        if value is not None:
            params[key] = value
    return _Call("GET", "/v1/certificates", params=params)


def call_verify(certificate_id: str, rtol: float | None) -> _Call:
    cid = _path_id(certificate_id, "certificate id")
    body = _json_bytes({"rtol": float(rtol)}) if rtol is not None else None
    return _Call("POST", f"/v1/certificates/{cid}/verify", body, retry_safe=True)


def call_archive(certificate_id: str) -> _Call:
    return _Call("GET", f"/v1/certificates/{_path_id(certificate_id, 'certificate id')}/archive")


def _path_id(value: str, what: str) -> str:
    if not value or "/" in value or value in (".", ".."):
        raise ValueError(f"{what} {value!r} is not a valid id")
    return value


# ---------------------------------------------------------------------------
# Responses
# ---------------------------------------------------------------------------


def error_from_response(
    response: httpx.Response, call: _Call, statuses: frozenset[int]
) -> BoundsvcClientError:
    """The client error for a 4xx/5xx answer, from its problem+json body when it has one."""
    url = str(response.request.url) if response.request is not None else call.path
    rid = response.headers.get("x-request-id")
    unavailable_now = response.status_code in statuses or _problem_code(response) == IN_PROGRESS
    kind = ServiceUnavailable if unavailable_now else BoundsvcClientError
    body: dict[str, Any] = {}
    try:
        decoded = response.json()
        if isinstance(decoded, dict):
            body = decoded
    except ValueError:
        pass
    try:
        details = ProblemDetails.model_validate(body)
    except ValidationError:
        text = response.text.strip()[:500] or response.reason_phrase
        return kind(
            text,
            status=response.status_code,
            code=f"http_{response.status_code}",
            request_id=rid,
            method=call.method,
            url=url,
            body=body,
        )
    if response.status_code == 429 and "retry-after" in response.headers:
        body.setdefault("retry_after", response.headers["retry-after"])
    return kind(
        details.detail,
        status=response.status_code,
        code=details.code,
        errors=details.errors,
        request_id=details.request_id or rid,
        method=call.method,
        url=url,
        body=body,
    )


def unavailable(
    exc: httpx.TransportError, call: _Call, base_url: str, attempts: int
) -> ServiceUnavailable:
    """The client error for a request that got no answer."""
    code = "timeout" if isinstance(exc, httpx.TimeoutException) else "unreachable"
    tried = f" after {attempts} attempts" if attempts > 1 else ""
    detail = f"cannot reach the service at {base_url}{tried}: {type(exc).__name__}: {exc}"
    return ServiceUnavailable(detail, code=code, method=call.method, url=base_url + call.path)


def parse_model(response: httpx.Response, model: type[_ModelT], call: _Call) -> _ModelT:
    """Validate a JSON answer into ``model`` (an unexpected body is a client error too)."""
    try:
        return model.model_validate_json(response.content)
    except ValidationError as exc:
        raise BoundsvcClientError(
            f"the service's answer does not match {model.__name__}: {exc.error_count()} "
            f"error(s), first: {exc.errors()[0]['msg']}",
            status=response.status_code,
            code="invalid_response",
            request_id=response.headers.get("x-request-id"),
            method=call.method,
            url=str(response.request.url) if response.request is not None else call.path,
        ) from exc


def parse_json_object(response: httpx.Response, call: _Call) -> dict[str, Any]:
    try:
        body = response.json()
    except ValueError:
        body = None
    if not isinstance(body, dict):
        raise BoundsvcClientError(
            "the service's answer is not a JSON object",
            status=response.status_code,
            code="invalid_response",
            method=call.method,
            url=call.path,
        )
    return body


# ---------------------------------------------------------------------------
# Result types that are not plain wire models
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class ComponentPoints:
    """One plan component as arrays: residuals go in the order of ``points``' rows.

    Attributes
    ----------
    name : str
        ``"interior"``, ``"initial"``, ``"boundary"``, ``"periodic"``, ...
    axes : tuple of str
        Coordinate order of the columns of ``points`` (``("t", "x")``, ``("x",)``, ...).
    points : ndarray, shape (size, len(axes))
    weights : ndarray, shape (size,)
        Quadrature weights, summing to the measure of the set.
    """

    name: str
    axes: tuple[str, ...]
    points: FloatArray
    weights: FloatArray

    @property
    def size(self) -> int:
        """Number of points."""
        return int(self.points.shape[0])

    def column(self, axis: str) -> FloatArray:
        """The coordinate ``axis`` of every point."""
        if axis not in self.axes:
            raise KeyError(f"component {self.name!r} has axes {list(self.axes)}, not {axis!r}")
        return self.points[:, self.axes.index(axis)]

    @classmethod
    def from_wire(cls, component: PlanComponent) -> ComponentPoints:
        axes = tuple(component.axes)
        points = np.asarray(component.points, dtype=np.float64).reshape(-1, len(axes))
        weights = np.asarray(component.weights, dtype=np.float64)
        if points.shape[0] != weights.shape[0] or points.shape[0] != component.size:
            raise ValueError(
                f"plan component {component.name!r}: {points.shape[0]} points, "
                f"{weights.shape[0]} weights, size {component.size}"
            )
        points.setflags(write=False)
        weights.setflags(write=False)
        return cls(component.name, axes, points, weights)


@dataclass(frozen=True)
class Plan:
    """A quadrature plan with numpy arrays per component (``plan["interior"].points``).

    Save it with :meth:`save` (``.npz`` or ``.json``) and certify later with its ``plan_id``.
    """

    plan_id: str
    problem_id: str
    rule: str
    components: Mapping[str, ComponentPoints]
    axis_nodes: Mapping[str, FloatArray] = field(default_factory=dict)
    time_nodes: FloatArray = field(default_factory=lambda: np.zeros(0))
    warnings: tuple[str, ...] = ()

    def __getitem__(self, name: str) -> ComponentPoints:
        try:
            return self.components[name]
        except KeyError:
            raise KeyError(
                f"the plan has no component {name!r} (it has {', '.join(self.components)})"
            ) from None

    @property
    def names(self) -> tuple[str, ...]:
        """Component names in the service's order."""
        return tuple(self.components)

    @property
    def sizes(self) -> dict[str, int]:
        """Number of points per component."""
        return {name: c.size for name, c in self.components.items()}

    @classmethod
    def from_response(cls, response: PlanResponse) -> Plan:
        """Arrays from the wire model of ``POST /v1/plans``."""
        return cls(
            plan_id=response.plan_id,
            problem_id=response.problem_id,
            rule=response.rule,
            components={c.name: ComponentPoints.from_wire(c) for c in response.components},
            axis_nodes={k: np.asarray(v, dtype=np.float64) for k, v in response.axis_nodes.items()},
            time_nodes=np.asarray(response.time_nodes, dtype=np.float64),
            warnings=tuple(response.warnings),
        )

    def to_response(self) -> PlanResponse:
        """The wire model again (what ``.json`` files hold)."""
        return PlanResponse(
            plan_id=self.plan_id,
            rule=self.rule,
            problem_id=self.problem_id,
            components=[
                PlanComponent(
                    name=c.name,
                    axes=list(c.axes),
                    points=c.points.tolist(),
                    weights=c.weights.tolist(),
                    size=c.size,
                )
                for c in self.components.values()
            ],
            axis_nodes={k: v.tolist() for k, v in self.axis_nodes.items()},
            time_nodes=self.time_nodes.tolist(),
            warnings=list(self.warnings),
        )

    def save(self, path: str | os.PathLike[str]) -> None:
        """Write ``.npz`` (arrays ``<component>.points``/``.weights`` and a JSON ``meta``) or
        ``.json`` (the body of ``POST /v1/plans``), chosen by the suffix."""
        target = Path(path)
        suffix = target.suffix.lower()
        if suffix == ".json":
            target.write_text(self.to_response().model_dump_json(indent=1) + "\n")
            return
        if suffix != ".npz":
            raise ValueError(f"{target}: a plan file must end in .npz or .json")
        meta = {
            "format": "boundsvc-plan/1",
            "plan_id": self.plan_id,
            "problem_id": self.problem_id,
            "rule": self.rule,
            "components": {n: list(c.axes) for n, c in self.components.items()},
            "warnings": list(self.warnings),
        }
        arrays: dict[str, npt.NDArray[Any]] = {
            "meta": np.array(json.dumps(meta)),
            "time_nodes": self.time_nodes,
        }
        for name, comp in self.components.items():
            arrays[f"{name}.points"] = comp.points
            arrays[f"{name}.weights"] = comp.weights
        for axis, nodes in self.axis_nodes.items():
            arrays[f"axis.{axis}"] = nodes
        with open(target, "wb") as fh:
            np.savez(fh, **arrays)  # type: ignore[arg-type]

    @classmethod
    def load(cls, path: str | os.PathLike[str]) -> Plan:
        """Read a file written by :meth:`save` (npz loaded with ``allow_pickle=False``)."""
        source = Path(path)
        if source.suffix.lower() == ".json":
            return cls.from_response(PlanResponse.model_validate_json(source.read_bytes()))
        with np.load(source, allow_pickle=False) as data:
            if "meta" not in data.files:
                raise ValueError(f"{source}: not a boundsvc plan file (no 'meta' entry)")
            meta = json.loads(str(data["meta"][()]))
            if meta.get("format") != "boundsvc-plan/1":
                raise ValueError(f"{source}: unknown plan format {meta.get('format')!r}")
            comps = {}
            for name, axes in meta["components"].items():
                points = np.asarray(data[f"{name}.points"], dtype=np.float64)
                weights = np.asarray(data[f"{name}.weights"], dtype=np.float64)
                comps[name] = ComponentPoints(name, tuple(axes), points, weights)
            axis_nodes = {
                key[len("axis.") :]: np.asarray(data[key], dtype=np.float64)
                for key in data.files
                if key.startswith("axis.")
            }
            time_nodes = np.asarray(data["time_nodes"], dtype=np.float64)
        return cls(
            plan_id=meta["plan_id"],
            problem_id=meta["problem_id"],
            rule=meta["rule"],
            components=comps,
            axis_nodes=axis_nodes,
            time_nodes=time_nodes,
            warnings=tuple(meta.get("warnings", ())),
        )


@dataclass(frozen=True)
class Report:
    """A rendered certificate report (``GET /v1/certificates/{id}/report``)."""

    certificate_id: str
    media_type: str
    content: bytes

    @property
    def text(self) -> str:
        return self.content.decode("utf-8", errors="replace")


def report_from(response: httpx.Response, certificate_id: str) -> Report:
    media = response.headers.get("content-type", "application/octet-stream").split(";")[0]
    return Report(certificate_id, media.strip(), response.content)


def _env_or(value: str | None, name: str) -> str | None:
    if value is not None:
        return value
    env = os.environ.get(name, "").strip()
    return env or None


def resolve_base_url(base_url: str | None) -> str:
    url = _env_or(base_url, "BOUNDSVC_URL") or DEFAULT_URL
    if not url.startswith(("http://", "https://")):
        raise ValueError(f"the service URL must start with http:// or https://, got {url!r}")
    return url.rstrip("/")


def base_headers(api_key: str | None, extra: Mapping[str, str] | None) -> dict[str, str]:
    headers = {"User-Agent": f"boundsvc-client/{__version__}"}
    key = _env_or(api_key, "BOUNDSVC_API_KEY")
    if key:
        headers["Authorization"] = f"Bearer {key}"
    headers.update(extra or {})
    return headers


def as_retry_policy(retries: RetryPolicy | int) -> RetryPolicy:
    return retries if isinstance(retries, RetryPolicy) else RetryPolicy(max_retries=retries)


# ---------------------------------------------------------------------------
# The synchronous client
# ---------------------------------------------------------------------------


class BoundsvcClient:
    """A blocking client of the boundsvc HTTP API.

    Parameters
    ----------
    base_url : str, optional
        The service, e.g. ``"https://bounds.example.org"``; default ``$BOUNDSVC_URL``, then
        ``http://127.0.0.1:8000``.
    api_key : str, optional
        Sent as ``Authorization: Bearer <key>``; default ``$BOUNDSVC_API_KEY``.
    timeout : float or httpx.Timeout
        Per-request timeouts (default: connect 5 s, read 120 s).
    retries : RetryPolicy or int
        Retry policy, or just the number of retries (see the module notes for what is retried).
    transport : httpx.BaseTransport, optional
        E.g. ``httpx.MockTransport`` in tests.
    http_client : httpx.Client, optional
        Use this client (e.g. FastAPI's ``TestClient(app)`` for an in-process service); it is
        not closed by :meth:`close`.
    sleep : callable
        How to wait between retries (tests pass a recorder).

    Examples
    --------
    >>> with BoundsvcClient("http://127.0.0.1:8000") as client:  # doctest: +SKIP
    ...     plan = client.plan(problem, points={"t": 32, "x": 32})
    ...     cert = client.certify(problem, plan, regularity, residuals)
    """

    def __init__(
        self,
        base_url: str | None = None,
        *,
        api_key: str | None = None,
        timeout: float | httpx.Timeout = DEFAULT_TIMEOUT,
        retries: RetryPolicy | int = DEFAULT_RETRY,
        transport: httpx.BaseTransport | None = None,
        http_client: httpx.Client | None = None,
        headers: Mapping[str, str] | None = None,
        sleep: Callable[[float], None] = time.sleep,
    ) -> None:
        self.base_url = resolve_base_url(base_url)
        self.retry = as_retry_policy(retries)
        self._headers = base_headers(api_key, headers)
        self._timeout = timeout if isinstance(timeout, httpx.Timeout) else httpx.Timeout(timeout)
        self._sleep = sleep
        self._owns_http = http_client is None
        self._http = http_client or httpx.Client(transport=transport, timeout=self._timeout)

    # -- plumbing -------------------------------------------------------------
    def close(self) -> None:
        """Close the connection pool (unless it was passed in)."""
        if self._owns_http:
            self._http.close()

    def __enter__(self) -> BoundsvcClient:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"BoundsvcClient({self.base_url!r})"

    def _send(self, call: _Call) -> httpx.Response:
        attempt = 0
        while True:
            headers = {**self._headers, **call.headers()}
            content: bytes | Iterator[bytes] | None = call.body
            if call.body is not None and call.progress is not None:
                content = call.chunks()
            try:
                response = self._http.request(
                    call.method,
                    self.base_url + call.path,
                    params=call.params or None,
                    content=content,
                    headers=headers,
                    timeout=self._timeout,
                )
            except httpx.TransportError as exc:
                wait = (
                    self.retry.delay(attempt)
                    if (call.retry_allowed and _is_connection_error(exc))
                    else None
                )
                if wait is None:
                    raise unavailable(exc, call, self.base_url, attempt + 1) from exc
                self._sleep(wait)
                attempt += 1
                continue
            if response.is_error:
                wait = retry_delay(self.retry, call, response, attempt)
                if wait is not None:
                    response.close()
                    self._sleep(wait)
                    attempt += 1
                    continue
            if response.is_error:
                raise error_from_response(response, call, self.retry.statuses)
            return response

    # -- the API ----------------------------------------------------------------
    def health(self) -> dict[str, Any]:
        """``GET /v1/health``: ``{"status": "ok", "version": ...}``."""
        call = _Call("GET", "/v1/health")
        return parse_json_object(self._send(call), call)

    def families(self) -> list[FamilyInfo]:
        """The catalogue of stability theorems."""
        call = _Call("GET", "/v1/families")
        return parse_model(self._send(call), FamilyList, call).families

    def problem(
        self,
        problem: ProblemLike,
        *,
        regularity: Mapping[str, float | str] | None = None,
        idempotent: bool = True,
    ) -> ProblemResponse:
        """Classify ``problem`` and derive its constants (``POST /v1/problems``).

        ``regularity`` optionally evaluates the constants. The call is idempotent by nature
        (the service keys problems by content), so by default it carries an idempotency key
        and is retried like a ``GET``.
        """
        call = call_problem(problem, regularity, idempotent)
        return parse_model(self._send(call), ProblemResponse, call)

    def get_problem(self, problem_id: str) -> ProblemResponse:
        """A stored problem's classification."""
        call = _Call("GET", f"/v1/problems/{_path_id(problem_id, 'problem id')}")
        return parse_model(self._send(call), ProblemResponse, call)

    def plan(
        self,
        problem: ProblemRef,
        *,
        points: Mapping[str, int] | None = None,
        panels: Mapping[str, int] | None = None,
        rule: str = "gauss-legendre",
        idempotent: bool = True,
        **options: Any,
    ) -> Plan:
        """Quadrature nodes and weights per component (``POST /v1/plans``).

        Parameters
        ----------
        problem : ProblemSpec, mapping or str
            The problem, or the ``problem_id`` of a stored one.
        points : mapping of axis to int
            Gauss-Legendre (or grid) nodes per panel, e.g. ``{"t": 32, "x": 32}``.
        panels : mapping of axis to int, optional
            Composite panels per axis.
        rule : str
            ``gauss-legendre``, ``sobol``, ``monte-carlo``, ``grid`` or ``custom``.
        **options
            The other plan fields (:data:`PLAN_OPTIONS`): ``n``, ``replicates``, ``seed``
            (Sobol, Monte Carlo), ``weights`` (grid), ``components`` (custom),
            ``optional_components`` (e.g. ``["boundary_t"]`` for the boundary lifting).
        """
        call = call_plan(problem, points, panels, rule, idempotent, options)
        return Plan.from_response(parse_model(self._send(call), PlanResponse, call))

    def get_plan(self, plan_id: str) -> Plan:
        """A stored plan, rebuilt by the service."""
        call = _Call("GET", f"/v1/plans/{_path_id(plan_id, 'plan id')}")
        return Plan.from_response(parse_model(self._send(call), PlanResponse, call))

    def certify(
        self,
        problem: ProblemRef,
        plan: Plan | str,
        regularity: Mapping[str, float | str],
        residuals: ResidualsLike,
        *,
        model: ModelLike | None = None,
        encoding: Encoding = "base64",
        idempotent: bool = True,
        idempotency_key: str | None = None,
        progress: Progress | None = None,
        archive: bool | None = None,
    ) -> Certificate:
        """Compute and store a certificate (``POST /v1/certificates``).

        Parameters
        ----------
        problem : ProblemSpec, mapping or str
            The problem, or its ``problem_id``.
        plan : Plan or str
            The plan (or its ``plan_id``) whose points the residuals were evaluated at.
        regularity : mapping
            Regularity bounds: numbers or expression strings in ``t``.
        residuals : mapping of str to array_like
            Per component, in the plan's point order (see :func:`encode_residuals`).
        model : ModelInfo or mapping, optional
            ``{"name": ..., "version": ..., "epoch": ...}`` for the registry.
        encoding : {"base64", "json"}
            How the arrays travel (base64 float64 by default: exact and compact).
        idempotent : bool
            Send an ``Idempotency-Key`` (fresh per call) so that the call can be retried safely.
        idempotency_key : str, optional
            Use this key instead (to repeat a call across processes).
        progress : callable, optional
            ``progress(sent, total)`` in bytes while uploading.
        archive : bool, optional
            Keep the residuals on the service so that :meth:`verify` can recompute the
            certificate later (``None``: the service's default).
        """
        call = call_certify(
            problem,
            plan,
            regularity,
            residuals,
            model,
            encoding,
            idempotent,
            idempotency_key,
            progress,
            archive,
        )
        return parse_model(self._send(call), Certificate, call)

    def certificate(self, certificate_id: str) -> Certificate:
        """A stored certificate."""
        call = _Call("GET", f"/v1/certificates/{_path_id(certificate_id, 'certificate id')}")
        return parse_model(self._send(call), Certificate, call)

    def certificates_page(
        self,
        *,
        model: str | None = None,
        version: str | None = None,
        family: str | None = None,
        status: str | None = None,
        limit: int = 50,
        cursor: str | None = None,
    ) -> CertificatePage:
        """One page of the certificate list, newest first."""
        call = call_list(model, version, family, status, limit, cursor)
        return parse_model(self._send(call), CertificatePage, call)

    def certificates(
        self,
        *,
        model: str | None = None,
        version: str | None = None,
        family: str | None = None,
        status: str | None = None,
        limit: int | None = None,
        cursor: str | None = None,
        page_size: int = 100,
    ) -> Iterator[CertificateSummary]:
        """Certificates newest first, fetching pages as the iteration goes.

        ``limit`` caps the number of items yielded (``None``: all); ``cursor`` resumes a
        listing from a page's ``next_cursor``.
        """
        remaining = limit
        while remaining is None or remaining > 0:
            size = page_size if remaining is None else min(page_size, remaining)
            page = self.certificates_page(
                model=model,
                version=version,
                family=family,
                status=status,
                limit=size,
                cursor=cursor,
            )
            yield from page.items
            if remaining is not None:
                remaining -= len(page.items)
            if page.next_cursor is None or not page.items:
                return
            cursor = page.next_cursor

    def latest_certificate(self, model: str, version: str | None = None) -> Certificate | None:
        """The newest certificate of a model (and version), or ``None`` if it has none."""
        for item in self.certificates(model=model, version=version, limit=1):
            return self.certificate(item.id)
        return None

    def verify(self, certificate_id: str, *, rtol: float | None = None) -> VerificationReport:
        """Recompute a stored certificate from its residual archive with the service's
        running version (``POST /v1/certificates/{id}/verify``; nothing is stored).

        ``report.matches`` says whether it still holds; ``report.differences`` what changed.
        ``rtol`` (default: the service's, 1e-12) is the relative tolerance for numbers. A
        certificate without archive raises :class:`BoundsvcClientError` with code
        ``not_archived``, a damaged archive ``archive_corrupt`` (both 409).
        """
        call = call_verify(certificate_id, rtol)
        return parse_model(self._send(call), VerificationReport, call)

    def archive_info(self, certificate_id: str) -> ArchiveMetadata:
        """Codec, SHA-256 and size of a certificate's residual archive (code
        ``archive_not_found`` if it has none)."""
        call = call_archive(certificate_id)
        return parse_model(self._send(call), ArchiveMetadata, call)

    def report(self, certificate_id: str) -> Report:
        """The rendered report of a certificate (``GET /v1/certificates/{id}/report``).

        A service without the report route answers 404 with code ``not_found``; a missing
        certificate is code ``certificate_not_found``.
        """
        cid = _path_id(certificate_id, "certificate id")
        call = _Call("GET", f"/v1/certificates/{cid}/report", accept="text/html, */*")
        return report_from(self._send(call), cid)
