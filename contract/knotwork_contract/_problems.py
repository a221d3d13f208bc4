"""The problem record: what is wrong with a request, where, and the document that carries it.

One record, :class:`Problem`, says where a request is wrong (a JSON pointer) and why; the
numerical core raises its errors with them, the service's codecs translate their pointers into
the caller's request, and every error answer is a :class:`ProblemDocument` (RFC 9457) whose
``errors`` are these records. The client decodes the same document.
"""

from __future__ import annotations

import msgspec

__all__ = ["Problem", "ProblemDocument"]


class Problem(msgspec.Struct, frozen=True):
    # The core raises these with pointers relative to its own input or options document;
    # the service's codecs translate them before any reaches a caller.
    """Where a request is wrong and why.

    Attributes
    ----------
    pointer
        JSON pointer (RFC 6901) into the request document (``/input/columns/x/3``), a column
        of a binary table (``/columns/x``) or a query parameter (``/query/threshold``); ``""``
        for the whole body.
    reason
        What was expected and what came, in one sentence.
    """

    pointer: str = ""
    reason: str = ""


class ProblemDocument(msgspec.Struct, frozen=True, kw_only=True):
    # The service fills every field. The defaults are RFC 9457's reading of an absent member
    # ("about:blank" for type) and "not given" (None), so a client also reads problem
    # documents from elsewhere on the path (a proxy) that carry fewer members.
    """An error (RFC 9457), described for machines (``type``, ``errors``) and people.

    Attributes
    ----------
    type
        Stable URI of the kind of error; match on it rather than on the wording.
    title
        Short, fixed summary of the kind of error.
    status
        The HTTP status code.
    detail
        This occurrence, in one sentence: what was wrong and how to fix it.
    errors
        Each offending field with its pointer and reason (empty when no field is at fault).
    request_id
        The request's id, as in the X-Request-ID header and the service's logs.
    """

    type: str = "about:blank"
    title: str = ""
    status: int | None = None
    detail: str | None = None
    errors: list[Problem] = msgspec.field(default_factory=list)
    request_id: str | None = None
