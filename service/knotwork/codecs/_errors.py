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
    ├── UnusableInput          422  it fits the schema but its data cannot be used as given,
    │                               or a number is of the right type outside its range
    │                               (:func:`schema_fault`)
    ├── TooLarge               413  beyond a configured limit (cells, columns, batch items)
    └── UnsupportedMediaType   415  a content type the route does not read
"""

from __future__ import annotations

import re

import msgspec

from knotwork_contract import Problem, msgspec_fault

__all__ = [
    "CodecError",
    "InvalidRequest",
    "MalformedBody",
    "TooLarge",
    "UnsupportedMediaType",
    "UnusableInput",
    "schema_fault",
]

# msgspec's words for a number of the right type that breaks a declared bound.
_OUT_OF_RANGE = re.compile(r"^Expected `(?:int|float)` (?:>=|<=|>|<) ")


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


def schema_fault(
    error: msgspec.ValidationError, prefix: str = "", *, where: str = "", label: str = ""
) -> CodecError:
    """The codec error for a document that does not fit the request schema.

    A number of the right type outside its declared range (a threshold of 1, a level of 1.5,
    100 replicates too few, a negative n) is well-formed but unusable: 422, ``invalid-option``
    under ``options`` and ``invalid-input`` elsewhere. Anything else (a wrong type, an unknown
    or missing field) is a request that does not fit the schema: 400 ``invalid-request``.

    ``prefix`` is the pointer of the decoded document inside the request; ``where`` replaces
    the pointer msgspec gives (a query parameter's ``/query/<name>``), and ``label`` starts the
    message (``"query parameter <name>: "``). An option's pointer is ``/options/...`` after
    ``prefix``, or ``/query/...`` for an option sent as a query parameter.
    """
    pointer, reason = msgspec_fault(error, prefix)
    located = where or pointer
    problems = [Problem(located, reason)]
    if _OUT_OF_RANGE.match(reason) is None:
        return InvalidRequest(label + reason, problems)
    inner = pointer[len(prefix) :]
    option = inner.startswith("/options/") or located.startswith("/query/")
    return UnusableInput(
        label + reason, problems, kind="invalid-option" if option else "invalid-input"
    )
