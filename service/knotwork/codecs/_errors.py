"""Errors the codecs raise for a request that cannot be read.

Every error subclasses :class:`ValueError` and carries ``kind`` (a stable slug; the HTTP layer
builds the problem ``type`` from it), ``status`` (the HTTP status it stands for), a one-line
``message`` and ``problems``: the contract's :class:`~knotwork_contract.Problem` records, each
a JSON pointer into the request (or ``/query/<parameter>`` for a query parameter) and a reason.
The core's errors become :class:`UnusableInput` here (:func:`knotwork.codecs.run`), with their
kind kept and their pointers translated, so the HTTP layer maps codec errors only.

Hierarchy::

    CodecError (ValueError)
    ├── MalformedBody          400  the body does not parse (JSON, Arrow IPC, Parquet)
    ├── InvalidRequest         400  it parses but does not fit the request schema
    ├── UnusableInput          422  it fits the schema but its data cannot be used as given
    ├── TooLarge               413  beyond a configured limit (cells, columns, batch items)
    └── UnsupportedMediaType   415  a content type the route does not read
"""

from __future__ import annotations

from knotwork_contract import Problem

__all__ = [
    "CodecError",
    "InvalidRequest",
    "MalformedBody",
    "TooLarge",
    "UnsupportedMediaType",
    "UnusableInput",
]


class CodecError(ValueError):
    """Base of the errors raised while reading a request."""

    kind = "invalid-request"
    status = 400

    def __init__(
        self,
        message: str,
        problems: tuple[Problem, ...] | list[Problem] = (),
        *,
        kind: str | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.problems: tuple[Problem, ...] = tuple(problems)
        if kind is not None:
            self.kind = kind

    @classmethod
    def at(cls, pointer: str, reason: str) -> CodecError:
        """An error with a single fault whose reason is also the message."""
        return cls(reason, [Problem(pointer, reason)])


class MalformedBody(CodecError):
    """The body does not parse."""

    kind = "malformed-body"
    status = 400


class InvalidRequest(CodecError):
    """The body parses but does not fit the request schema (types, fields, parameters)."""

    kind = "invalid-request"
    status = 400


class UnusableInput(CodecError):
    """The request fits the schema, but its data cannot be used as given."""

    kind = "invalid-input"
    status = 422


class TooLarge(CodecError):
    """The request is beyond a configured limit."""

    status = 413

    def __init__(
        self, kind: str, message: str, problems: tuple[Problem, ...] | list[Problem] = ()
    ) -> None:
        super().__init__(message, problems, kind=kind)


class UnsupportedMediaType(CodecError):
    """The route does not read this content type."""

    kind = "unsupported-media-type"
    status = 415
