"""Exceptions raised by the knotwork client.

Two families: the service answered with a problem document (RFC 9457), or something went
wrong on this side of the wire (the service could not be reached, its answer could not be read,
or the local data cannot be summarized). Each subclasses the built-in exception a plain handler
would expect, so ``except ValueError`` still catches bad data and ``except ConnectionError``
still catches an unreachable service.

Hierarchy::

    KnotworkClientError (Exception)
    ├── ServiceError                      the service answered with an error status
    │   ├── InputRejectedError (ValueError)   400, 413, 415, 422: the request cannot be used
    │   ├── AuthenticationError (PermissionError)  401, 403: missing or wrong token
    │   ├── ServiceBusyError                  429, 503: still saturated after every retry
    │   └── ServerError                       any other 5xx
    ├── TransportError (ConnectionError)  the service could not be reached (after retries)
    ├── ResponseFormatError               a 2xx answer that is not the documented schema
    └── DataError (ValueError)            local data cannot be summarized or sent as given
        └── MissingValuesError                missing values under ``missing="reject"``
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from ._results import ProblemDetails

__all__ = [
    "AuthenticationError",
    "DataError",
    "InputRejectedError",
    "KnotworkClientError",
    "MissingValuesError",
    "ResponseFormatError",
    "ServerError",
    "ServiceBusyError",
    "ServiceError",
    "TransportError",
]


class KnotworkClientError(Exception):
    """Base class of every exception the client raises on purpose."""


class ServiceError(KnotworkClientError):
    """The service answered with an error status.

    Attributes
    ----------
    status
        The HTTP status code of the answer.
    problem
        The problem document (RFC 9457) the service sent, or one made up from the status
        line when the body was not a problem document (a proxy's plain 502, say).
    retry_after
        Seconds the service asked us to wait (``Retry-After``), or None.
    """

    def __init__(
        self, problem: ProblemDetails, status: int, retry_after: float | None = None
    ) -> None:
        self.problem = problem
        self.status = status
        self.retry_after = retry_after
        super().__init__(self._describe())

    def _describe(self) -> str:
        head = f"{self.status} {self.problem.title}".rstrip()
        if self.problem.detail:
            head = f"{head}: {self.problem.detail}"
        lines = [head]
        lines += [f"  at {e.pointer}: {e.reason}" for e in self.problem.errors]
        return "\n".join(lines)

    @property
    def type(self) -> str:
        """The stable URI naming this kind of error (the problem's ``type``)."""
        return self.problem.type

    @property
    def detail(self) -> str | None:
        """The problem's human-readable explanation."""
        return self.problem.detail

    @property
    def pointers(self) -> list[str]:
        """The JSON pointers (or column names) of every field the service objected to."""
        return [e.pointer for e in self.problem.errors]


class InputRejectedError(ServiceError, ValueError):
    """The service could not use the request (400, 413, 415 or 422); retrying will not help."""


class AuthenticationError(ServiceError, PermissionError):
    """The token is missing (401) or not accepted (403)."""


class ServiceBusyError(ServiceError):
    """The service stayed saturated (429 or 503) through every allowed retry."""


class ServerError(ServiceError):
    """The service failed (a 5xx other than 503)."""


class TransportError(KnotworkClientError, ConnectionError):
    """The service could not be reached, or the connection broke, through every retry."""


class ResponseFormatError(KnotworkClientError):
    """A successful answer whose body is not the documented JSON (wrong server or version?)."""


class DataError(KnotworkClientError, ValueError):
    """Local data cannot be summarized or sent as given.

    Attributes
    ----------
    problems
        ``(where, reason)`` pairs: ``where`` is a column name or a JSON pointer into the input
        that would have been sent. Reasons never quote data values.
    """

    def __init__(self, message: str, problems: list[tuple[str, str]] | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.problems: list[tuple[str, str]] = list(problems or [])


class MissingValuesError(DataError):
    """Missing values were found and the policy is ``missing="reject"``.

    Attributes
    ----------
    counts
        Column name -> number of missing values found in it.
    """

    def __init__(self, counts: dict[str, int]) -> None:
        self.counts = dict(counts)
        listed = ", ".join(f"{name!r} ({k})" for name, k in self.counts.items())
        super().__init__(
            f"missing values in {listed}; pass missing='drop_rows' to use complete rows only, "
            "or missing='pairwise' to use every available pair",
            [(name, f"{k} missing values") for name, k in self.counts.items()],
        )
