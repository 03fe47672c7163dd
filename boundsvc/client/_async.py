"""The asynchronous client: the same calls as :class:`BoundsvcClient`, awaited.

Requests, retries and decoding are the shared functions of :mod:`boundsvc.client._http`; only
sending differs.
"""

from __future__ import annotations

import asyncio
from collections.abc import AsyncIterator, Awaitable, Callable, Mapping
from typing import Any

import httpx

from api_schemas import (
    ArchiveMetadata,
    Certificate,
    CertificatePage,
    CertificateSummary,
    FamilyInfo,
    FamilyList,
    PlanResponse,
    ProblemResponse,
    VerificationReport,
)
from boundsvc.client._http import (
    DEFAULT_RETRY,
    DEFAULT_TIMEOUT,
    Encoding,
    ModelLike,
    Plan,
    ProblemLike,
    ProblemRef,
    Progress,
    Report,
    ResidualsLike,
    RetryPolicy,
    _Call,
    _is_connection_error,
    _path_id,
    as_retry_policy,
    base_headers,
    call_archive,
    call_certify,
    call_list,
    call_plan,
    call_problem,
    call_verify,
    error_from_response,
    parse_json_object,
    parse_model,
    report_from,
    resolve_base_url,
    retry_delay,
    unavailable,
)

__all__ = ["AsyncBoundsvcClient"]


async def _achunks(call: _Call) -> AsyncIterator[bytes]:
    for piece in call.chunks():
        yield piece


class AsyncBoundsvcClient:
    """A non-blocking client of the boundsvc HTTP API (``async with``).

    The parameters are those of :class:`boundsvc.client.BoundsvcClient`, with an
    ``httpx.AsyncBaseTransport`` (e.g. ``httpx.ASGITransport(app=app)`` for an in-process
    service) or an ``httpx.AsyncClient``, and an awaitable ``sleep``.
    """

    def __init__(
        self,
        base_url: str | None = None,
        *,
        api_key: str | None = None,
        timeout: float | httpx.Timeout = DEFAULT_TIMEOUT,
        retries: RetryPolicy | int = DEFAULT_RETRY,
        transport: httpx.AsyncBaseTransport | None = None,
        http_client: httpx.AsyncClient | None = None,
        headers: Mapping[str, str] | None = None,
        sleep: Callable[[float], Awaitable[None]] = asyncio.sleep,
    ) -> None:
        self.base_url = resolve_base_url(base_url)
        self.retry = as_retry_policy(retries)
        self._headers = base_headers(api_key, headers)
        self._timeout = timeout if isinstance(timeout, httpx.Timeout) else httpx.Timeout(timeout)
        self._sleep = sleep
        self._owns_http = http_client is None
        self._http = http_client or httpx.AsyncClient(transport=transport, timeout=self._timeout)

    async def aclose(self) -> None:
        """Close the connection pool (unless it was passed in)."""
        if self._owns_http:
            await self._http.aclose()

    async def __aenter__(self) -> AsyncBoundsvcClient:
        return self

    async def __aexit__(self, *exc: object) -> None:
        await self.aclose()

    def __repr__(self) -> str:
        return f"AsyncBoundsvcClient({self.base_url!r})"

    async def _send(self, call: _Call) -> httpx.Response:
        attempt = 0
        while True:
            headers = {**self._headers, **call.headers()}
            content: Any = call.body
            if call.body is not None and call.progress is not None:
                content = _achunks(call)
            try:
                response = await self._http.request(
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
                await self._sleep(wait)
                attempt += 1
                continue
            if response.is_error:
                wait = retry_delay(self.retry, call, response, attempt)
                if wait is not None:
                    await response.aclose()
                    await self._sleep(wait)
                    attempt += 1
                    continue
            if response.is_error:
                raise error_from_response(response, call, self.retry.statuses)
            return response

    async def health(self) -> dict[str, Any]:
        """``GET /v1/health``."""
        call = _Call("GET", "/v1/health")
        return parse_json_object(await self._send(call), call)

    async def families(self) -> list[FamilyInfo]:
        """The catalogue of stability theorems."""
        call = _Call("GET", "/v1/families")
        return parse_model(await self._send(call), FamilyList, call).families

    async def problem(
        self,
        problem: ProblemLike,
        *,
        regularity: Mapping[str, float | str] | None = None,
        idempotent: bool = True,
    ) -> ProblemResponse:
        """See :meth:`BoundsvcClient.problem`."""
        call = call_problem(problem, regularity, idempotent)
        return parse_model(await self._send(call), ProblemResponse, call)

    async def get_problem(self, problem_id: str) -> ProblemResponse:
        """A stored problem's classification."""
        call = _Call("GET", f"/v1/problems/{_path_id(problem_id, 'problem id')}")
        return parse_model(await self._send(call), ProblemResponse, call)

    async def plan(
        self,
        problem: ProblemRef,
        *,
        points: Mapping[str, int] | None = None,
        panels: Mapping[str, int] | None = None,
        rule: str = "gauss-legendre",
        idempotent: bool = True,
        **options: Any,
    ) -> Plan:
        """See :meth:`BoundsvcClient.plan`."""
        call = call_plan(problem, points, panels, rule, idempotent, options)
        return Plan.from_response(parse_model(await self._send(call), PlanResponse, call))

    async def get_plan(self, plan_id: str) -> Plan:
        """A stored plan, rebuilt by the service."""
        call = _Call("GET", f"/v1/plans/{_path_id(plan_id, 'plan id')}")
        return Plan.from_response(parse_model(await self._send(call), PlanResponse, call))

    async def certify(
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
        """See :meth:`BoundsvcClient.certify`."""
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
        return parse_model(await self._send(call), Certificate, call)

    async def certificate(self, certificate_id: str) -> Certificate:
        """A stored certificate."""
        call = _Call("GET", f"/v1/certificates/{_path_id(certificate_id, 'certificate id')}")
        return parse_model(await self._send(call), Certificate, call)

    async def certificates_page(
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
        return parse_model(await self._send(call), CertificatePage, call)

    async def certificates(
        self,
        *,
        model: str | None = None,
        version: str | None = None,
        family: str | None = None,
        status: str | None = None,
        limit: int | None = None,
        cursor: str | None = None,
        page_size: int = 100,
    ) -> AsyncIterator[CertificateSummary]:
        """See :meth:`BoundsvcClient.certificates` (``async for``)."""
        remaining = limit
        while remaining is None or remaining > 0:
            size = page_size if remaining is None else min(page_size, remaining)
            page = await self.certificates_page(
                model=model,
                version=version,
                family=family,
                status=status,
                limit=size,
                cursor=cursor,
            )
            for item in page.items:
                yield item
            if remaining is not None:
                remaining -= len(page.items)
            if page.next_cursor is None or not page.items:
                return
            cursor = page.next_cursor

    async def latest_certificate(
        self, model: str, version: str | None = None
    ) -> Certificate | None:
        """The newest certificate of a model (and version), or ``None``."""
        async for item in self.certificates(model=model, version=version, limit=1):
            return await self.certificate(item.id)
        return None

    async def verify(self, certificate_id: str, *, rtol: float | None = None) -> VerificationReport:
        """See :meth:`BoundsvcClient.verify`."""
        call = call_verify(certificate_id, rtol)
        return parse_model(await self._send(call), VerificationReport, call)

    async def archive_info(self, certificate_id: str) -> ArchiveMetadata:
        """See :meth:`BoundsvcClient.archive_info`."""
        call = call_archive(certificate_id)
        return parse_model(await self._send(call), ArchiveMetadata, call)

    async def report(self, certificate_id: str) -> Report:
        """See :meth:`BoundsvcClient.report`."""
        cid = _path_id(certificate_id, "certificate id")
        call = _Call("GET", f"/v1/certificates/{cid}/report", accept="text/html, */*")
        return report_from(await self._send(call), cid)
