"""``Client`` and ``AsyncClient``: one method per endpoint, retries, typed results and errors.

Both share :class:`_BaseClient`, which builds requests, decides on retries and reads answers
without doing any I/O; the two subclasses only send, sleep and loop.
"""

from __future__ import annotations

import os
import random
import time
from collections.abc import Awaitable, Callable, Iterable, Mapping
from pathlib import Path
from types import TracebackType
from typing import Any

import anyio
import anyio.to_thread
import httpx
import msgspec

from ._config import DEFAULT_ARROW_CELLS, DEFAULT_TIMEOUT, Retry, parse_retry_after
from ._encode import Payload, batch_body, encode_assess, input_document, normalize_options
from ._exceptions import (
    AuthenticationError,
    InputRejectedError,
    ResponseFormatError,
    ServerError,
    ServiceBusyError,
    ServiceError,
    TransportError,
)
from ._glm_dask import GlmSummaries
from ._results import Assessment, ProblemDetails
from ._version import VERSION

__all__ = ["AsyncClient", "Client"]


#: Connection failures worth another try: nothing reached the service, or the connection broke
#: before an answer. A read timeout is not among them: the service may still be computing, and
#: it has its own per-request time limit.
_RETRIED_ERRORS: tuple[type[Exception], ...] = (
    httpx.ConnectError,
    httpx.ConnectTimeout,
    httpx.PoolTimeout,
    httpx.ReadError,
    httpx.WriteError,
    httpx.RemoteProtocolError,
)

_TABLE_ARGS = ("response", "weights", "categorical", "names", "columns", "offset", "trials")

BatchResult = Assessment | ProblemDetails

#: What the report route answers with; its errors stay problem+json.
_REPORT_ACCEPT = "text/html, application/problem+json"


def _problem_from(response: httpx.Response) -> ProblemDetails:
    """The problem document of an error answer, or one made from the status line."""
    try:
        problem = msgspec.json.decode(response.content, type=ProblemDetails)
    except (msgspec.DecodeError, msgspec.ValidationError):
        problem = None
    if problem is None or (problem.title == "" and problem.status is None):
        problem = ProblemDetails(
            title=response.reason_phrase or "error", status=response.status_code
        )
    return problem


def _error_for(response: httpx.Response) -> ServiceError:
    status = response.status_code
    problem = _problem_from(response)
    retry_after = parse_retry_after(response.headers.get("Retry-After"))
    cls: type[ServiceError]
    if status in (401, 403):
        cls = AuthenticationError
    elif status in (429, 503):
        cls = ServiceBusyError
    elif 400 <= status < 500:
        cls = InputRejectedError
    elif status >= 500:
        cls = ServerError
    else:
        cls = ServiceError
    return cls(problem, status, retry_after)


def _batch_result(doc: Any) -> BatchResult:
    if isinstance(doc, Mapping) and "variables" not in doc and ("type" in doc or "status" in doc):
        return msgspec.convert(doc, ProblemDetails)
    return msgspec.convert(doc, Assessment)


class _BaseClient:
    """Configuration, request building, retry decisions and answer reading (no I/O)."""

    def __init__(
        self,
        base_url: str,
        *,
        token: str | None,
        timeout: float | httpx.Timeout | None,
        retry: Retry | None,
        headers: Mapping[str, str] | None,
        arrow_cells: int,
        clock: Callable[[], float] | None,
    ) -> None:
        self.base_url = str(base_url).rstrip("/")
        self.retry = retry if retry is not None else Retry()
        self.arrow_cells = int(arrow_cells)
        self._clock = clock or time.monotonic
        self._uniform = random.random
        merged = {
            "User-Agent": f"knotwork-client/{VERSION}",
            "Accept": "application/json, application/problem+json",
        }
        merged.update(headers or {})
        if token is not None:
            if not token or any(c in token for c in "\r\n"):
                raise ValueError("token must be a non-empty string on one line")
            merged["Authorization"] = f"Bearer {token}"
        self._headers = merged
        self._timeout = timeout

    # --- requests ---------------------------------------------------------------------

    def _assess_payload(self, data: Any, kwargs: dict[str, Any]) -> Payload:
        table_args = {k: kwargs.pop(k, None) for k in _TABLE_ARGS}
        encoding = kwargs.pop("encoding", "auto")
        return encode_assess(
            data, kwargs, encoding=encoding, arrow_cells=self.arrow_cells, **table_args
        )

    def _batch_payload(self, items: Iterable[Any], common: dict[str, Any]) -> bytes:
        pairs = []
        for item in items:
            data, own = item, {}
            if isinstance(item, tuple) and len(item) == 2 and isinstance(item[1], Mapping):
                data, own = item[0], dict(item[1])
            merged = {**common, **own}
            table_args = {k: merged.pop(k, None) for k in _TABLE_ARGS}
            merged.pop("encoding", None)
            pairs.append((input_document(data, **table_args), normalize_options(merged)))
        return batch_body(pairs)

    # --- retries ----------------------------------------------------------------------

    def _next_delay(self, attempt: int, retry_after: float | None, started: float) -> float | None:
        """Seconds to wait before the next try, or None to stop trying."""
        if attempt >= self.retry.attempts:
            return None
        wait = self.retry.delay(attempt, retry_after, self._uniform)
        if self._clock() - started + wait > self.retry.total:
            return None
        return wait

    def _wait_after(self, response: httpx.Response, attempt: int, started: float) -> float | None:
        """Seconds to wait before sending again after ``response``, or None if it is final."""
        if response.status_code not in self.retry.statuses:
            return None
        retry_after = parse_retry_after(response.headers.get("Retry-After"))
        return self._next_delay(attempt, retry_after, started)

    # --- answers ----------------------------------------------------------------------

    @staticmethod
    def _json(response: httpx.Response) -> Any:
        if response.is_success:
            try:
                return msgspec.json.decode(response.content)
            except msgspec.DecodeError as exc:
                raise ResponseFormatError(
                    f"{response.status_code} answer from {response.request.url} is not JSON"
                ) from exc
        raise _error_for(response)

    @staticmethod
    def _page(response: httpx.Response) -> bytes:
        if not response.is_success:
            raise _error_for(response)
        media = response.headers.get("Content-Type", "")
        if not media.startswith("text/html"):
            raise ResponseFormatError(
                f"{response.status_code} answer from {response.request.url} is not HTML: {media}"
            )
        return response.content

    @staticmethod
    def _write(page: bytes, path: str | os.PathLike[str]) -> Path:
        target = Path(path)
        target.write_bytes(page)
        return target

    @staticmethod
    def _assessment(doc: Any) -> Assessment:
        try:
            return msgspec.convert(doc, Assessment)
        except msgspec.ValidationError as exc:
            raise ResponseFormatError(f"the answer is not an assessment: {exc}") from exc

    @staticmethod
    def _batch(doc: Any) -> list[BatchResult]:
        if not isinstance(doc, Mapping) or not isinstance(doc.get("results"), list):
            raise ResponseFormatError("the batch answer has no 'results' list")
        try:
            return [_batch_result(d) for d in doc["results"]]
        except msgspec.ValidationError as exc:
            raise ResponseFormatError(f"a batch result is neither kind: {exc}") from exc


class Client(_BaseClient):
    """Synchronous client of the knotwork service.

    Parameters
    ----------
    base_url
        Where the service answers, e.g. ``http://127.0.0.1:8000``.
    token
        Bearer token, sent as ``Authorization: Bearer <token>``.
    timeout
        Seconds, or an ``httpx.Timeout``; finite by default (5 s to connect, 60 s to answer).
    transport
        An httpx transport, e.g. ``httpx.MockTransport`` in tests.
    retry
        The retry policy (:class:`Retry`); ``Retry(attempts=1)`` disables retries.
    headers
        Extra headers sent with every request.
    arrow_cells
        Tables with at least this many cells go as an Arrow IPC stream (pyarrow installed).
    sleep, clock
        How to wait and what time it is; replace both in tests to retry without waiting.

    Examples
    --------
    >>> with Client("http://127.0.0.1:8000") as client:       # doctest: +SKIP
    ...     result = client.assess(frame, response="takings", threshold=10)
    ...     result.to_frame()["vif"]
    """

    def __init__(
        self,
        base_url: str,
        token: str | None = None,
        timeout: float | httpx.Timeout | None = DEFAULT_TIMEOUT,
        transport: httpx.BaseTransport | None = None,
        *,
        retry: Retry | None = None,
        headers: Mapping[str, str] | None = None,
        arrow_cells: int = DEFAULT_ARROW_CELLS,
        sleep: Callable[[float], None] | None = None,
        clock: Callable[[], float] | None = None,
    ) -> None:
        super().__init__(
            base_url,
            token=token,
            timeout=timeout,
            retry=retry,
            headers=headers,
            arrow_cells=arrow_cells,
            clock=clock,
        )
        self._sleep = sleep or time.sleep
        self._http = httpx.Client(
            base_url=self.base_url, headers=self._headers, timeout=timeout, transport=transport
        )

    def __enter__(self) -> Client:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    def close(self) -> None:
        """Close the connection pool."""
        self._http.close()

    def _send(
        self,
        method: str,
        path: str,
        *,
        content: bytes | None = None,
        content_type: str | None = None,
        params: Mapping[str, str] | None = None,
        retry: bool = True,
        accept: str | None = None,
    ) -> httpx.Response:
        headers = {"Content-Type": content_type} if content_type else {}
        if accept is not None:
            headers["Accept"] = accept
        started = self._clock()
        attempt = 0
        while True:
            attempt += 1
            try:
                response = self._http.request(
                    method, path, content=content, headers=headers, params=params
                )
            except _RETRIED_ERRORS as exc:
                wait = self._next_delay(attempt, None, started) if retry else None
                if wait is None:
                    raise TransportError(
                        f"{method} {path} failed after {attempt} attempt(s): {exc}"
                    ) from exc
                self._sleep(wait)
                continue
            except httpx.TransportError as exc:
                raise TransportError(f"{method} {path} failed: {exc}") from exc
            wait = self._wait_after(response, attempt, started) if retry else None
            if wait is not None:
                response.close()
                self._sleep(wait)
                continue
            return response

    def assess(self, data: Any, **options: Any) -> Assessment:
        """Assess one model: ``POST /v1/assess``.

        Parameters
        ----------
        data
            Rows (a DataFrame, an Arrow table, a named numpy array, a mapping of columns, a
            path to a CSV, Parquet or Arrow file), a summary (:class:`Summary`,
            :class:`Correlation`, :class:`Moments`), a fitted model's :class:`Estimates`, or
            a fitted statsmodels results object (read by :func:`from_fitted`). Large tables go
            as Arrow IPC. A GLM fitted on a Dask dataframe (:func:`summarize_glm_dask`) goes as
            one batch of its two summaries, and the answer is assembled as for rows.
        **options
            For rows: ``response``, ``weights``, ``categorical``, ``names``, ``columns``,
            and under a GLM family ``offset`` and ``trials`` (column names).
            Service options: ``threshold``, ``protect``, ``intercept``, ``missing``,
            ``repair``, ``sections``, ``ridge`` (``{"grid": [...]}``), ``components``
            (``{"rule": ..., "limit": ...}``), ``detail``, ``family`` (``gaussian``,
            ``binomial``, ``poisson``, ``gamma``, ``tweedie``), ``var_power`` (tweedie),
            ``uncertainty`` (``{"method": "normal" or "bootstrap", "level": ...,
            "replicates": ..., "seed": ...}``, an :class:`UncertaintyOptions`, or a bare
            method; the bootstrap needs rows, not a summary). ``encoding``: ``auto``, ``json``
            or ``arrow``.

        Raises
        ------
        InputRejectedError, AuthenticationError, ServiceBusyError, ServerError
            The service answered with an error; ``.problem`` holds its problem document.
        TransportError
            The service could not be reached through every retry.
        """
        if isinstance(data, GlmSummaries):
            return data.combine(self.assess_batch(data.requests(options)), options)  # type: ignore[no-any-return]
        return self._assessment(self._assess_document(data, options))

    def _assess_document(self, data: Any, options: dict[str, Any]) -> Any:
        return self._post_assess(self._assess_payload(data, dict(options)))

    def _post_assess(self, payload: Payload) -> Any:
        response = self._send(
            "POST",
            "/v1/assess",
            content=payload.content,
            content_type=payload.content_type,
            params=payload.params,
        )
        return self._json(response)

    def report(self, data: Any, path: str | os.PathLike[str], **options: Any) -> Path:
        """Assess one model and write its HTML report: ``POST /v1/report``.

        Takes the data and options of :meth:`assess`; writes the page the service answers
        (one self-contained HTML file: inline style, charts as inline SVG, nothing fetched) to
        ``path`` and returns that path. The service's errors raise as for :meth:`assess`.
        """
        return self._post_report(self._assess_payload(data, dict(options)), path)

    def _post_report(self, payload: Payload, path: str | os.PathLike[str]) -> Path:
        response = self._send(
            "POST",
            "/v1/report",
            content=payload.content,
            content_type=payload.content_type,
            params=payload.params,
            accept=_REPORT_ACCEPT,
        )
        return self._write(self._page(response), path)

    def assess_batch(self, items: Iterable[Any], **options: Any) -> list[BatchResult]:
        """Assess many models in one request: ``POST /v1/assess/batch``.

        Each item is data as for :meth:`assess`, or a ``(data, options)`` pair whose options
        override the common ``options``. Tables go as JSON. Returns, in order, an
        :class:`Assessment` for each item that succeeded and the :class:`ProblemDetails` of
        each that did not; a rejected item does not fail the others.
        """
        body = self._batch_payload(items, dict(options))
        response = self._send(
            "POST", "/v1/assess/batch", content=body, content_type="application/json"
        )
        return self._batch(self._json(response))

    def health(self) -> Any:
        """``GET /healthz``: the liveness document (raises if the service is not live)."""
        return self._json(self._send("GET", "/healthz", retry=False))

    def ready(self) -> bool:
        """``GET /readyz``: whether the service accepts work now (no retries)."""
        try:
            response = self._send("GET", "/readyz", retry=False)
        except TransportError:
            return False
        return response.is_success


class AsyncClient(_BaseClient):
    """Asynchronous client of the knotwork service; mirrors :class:`Client` method for method.

    ``sleep`` is an async function (``anyio.sleep`` by default, so asyncio and trio both work).
    """

    def __init__(
        self,
        base_url: str,
        token: str | None = None,
        timeout: float | httpx.Timeout | None = DEFAULT_TIMEOUT,
        transport: httpx.AsyncBaseTransport | None = None,
        *,
        retry: Retry | None = None,
        headers: Mapping[str, str] | None = None,
        arrow_cells: int = DEFAULT_ARROW_CELLS,
        sleep: Callable[[float], Awaitable[None]] | None = None,
        clock: Callable[[], float] | None = None,
    ) -> None:
        super().__init__(
            base_url,
            token=token,
            timeout=timeout,
            retry=retry,
            headers=headers,
            arrow_cells=arrow_cells,
            clock=clock,
        )
        if sleep is None:
            sleep = anyio.sleep
        self._sleep = sleep
        self._http = httpx.AsyncClient(
            base_url=self.base_url, headers=self._headers, timeout=timeout, transport=transport
        )

    async def __aenter__(self) -> AsyncClient:
        return self

    async def __aexit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        await self.aclose()

    async def aclose(self) -> None:
        """Close the connection pool."""
        await self._http.aclose()

    async def _send(
        self,
        method: str,
        path: str,
        *,
        content: bytes | None = None,
        content_type: str | None = None,
        params: Mapping[str, str] | None = None,
        retry: bool = True,
        accept: str | None = None,
    ) -> httpx.Response:
        headers = {"Content-Type": content_type} if content_type else {}
        if accept is not None:
            headers["Accept"] = accept
        started = self._clock()
        attempt = 0
        while True:
            attempt += 1
            try:
                response = await self._http.request(
                    method, path, content=content, headers=headers, params=params
                )
            except _RETRIED_ERRORS as exc:
                wait = self._next_delay(attempt, None, started) if retry else None
                if wait is None:
                    raise TransportError(
                        f"{method} {path} failed after {attempt} attempt(s): {exc}"
                    ) from exc
                await self._sleep(wait)
                continue
            except httpx.TransportError as exc:
                raise TransportError(f"{method} {path} failed: {exc}") from exc
            wait = self._wait_after(response, attempt, started) if retry else None
            if wait is not None:
                await response.aclose()
                await self._sleep(wait)
                continue
            return response

    async def assess(self, data: Any, **options: Any) -> Assessment:
        """Assess one model: ``POST /v1/assess`` (see :meth:`Client.assess`)."""
        if isinstance(data, GlmSummaries):
            return data.combine(await self.assess_batch(data.requests(options)), options)  # type: ignore[no-any-return]
        return self._assessment(await self._assess_document(data, options))

    async def _assess_document(self, data: Any, options: dict[str, Any]) -> Any:
        # Reading a file or encoding a large table is CPU and I/O work: keep it off the loop.
        payload = await anyio.to_thread.run_sync(self._assess_payload, data, dict(options))
        return await self._post_assess(payload)

    async def _post_assess(self, payload: Payload) -> Any:
        response = await self._send(
            "POST",
            "/v1/assess",
            content=payload.content,
            content_type=payload.content_type,
            params=payload.params,
        )
        return self._json(response)

    async def report(self, data: Any, path: str | os.PathLike[str], **options: Any) -> Path:
        """Assess one model and write its HTML report (see :meth:`Client.report`)."""
        payload = await anyio.to_thread.run_sync(self._assess_payload, data, dict(options))
        response = await self._send(
            "POST",
            "/v1/report",
            content=payload.content,
            content_type=payload.content_type,
            params=payload.params,
            accept=_REPORT_ACCEPT,
        )
        page = self._page(response)
        return await anyio.to_thread.run_sync(self._write, page, path)

    async def assess_batch(self, items: Iterable[Any], **options: Any) -> list[BatchResult]:
        """Assess many models in one request (see :meth:`Client.assess_batch`)."""
        body = await anyio.to_thread.run_sync(self._batch_payload, items, dict(options))
        response = await self._send(
            "POST", "/v1/assess/batch", content=body, content_type="application/json"
        )
        return self._batch(self._json(response))

    async def health(self) -> Any:
        """``GET /healthz``: the liveness document (raises if the service is not live)."""
        return self._json(await self._send("GET", "/healthz", retry=False))

    async def ready(self) -> bool:
        """``GET /readyz``: whether the service accepts work now (no retries)."""
        try:
            response = await self._send("GET", "/readyz", retry=False)
        except TransportError:
            return False
        return response.is_success
