"""Bearer tokens, compared in constant time.

Each configured token is kept only as its SHA-256 digest. A presented token is hashed and
compared with *every* digest by :func:`hmac.compare_digest`, without stopping at a match, so
neither the position of the matching token nor a near miss shows in the timing. Routes with
``opt={"public": True}`` (health, readiness, metrics, OpenAPI, docs) need no token, and with
no token configured every route is open.
"""

from __future__ import annotations

import hashlib
import hmac
from collections.abc import Iterable
from typing import Any

from litestar.connection import ASGIConnection
from litestar.handlers.base import BaseRouteHandler

from ._problems import ApiError

__all__ = ["TokenGate"]

_CHALLENGE = {"WWW-Authenticate": 'Bearer realm="knotwork"'}


def _digest(token: str) -> bytes:
    return hashlib.sha256(token.encode("utf-8")).digest()


class TokenGate:
    """Checks ``Authorization: Bearer <token>`` against the configured tokens."""

    def __init__(self, tokens: Iterable[str]) -> None:
        self._digests = tuple(_digest(t) for t in tokens)

    @property
    def open(self) -> bool:
        """True when no token is configured."""
        return not self._digests

    def accepts(self, token: str) -> bool:
        """Whether ``token`` is one of the configured tokens (constant time in the match)."""
        presented = _digest(token)
        found = False
        for digest in self._digests:
            # No early exit: every digest is compared, whatever the outcome so far.
            found |= hmac.compare_digest(presented, digest)
        return found

    def check(self, authorization: str | None) -> None:
        """Raise a 401 (no usable token) or 403 (a token that is not accepted) :class:`ApiError`."""
        if self.open:
            return
        if not authorization:
            raise ApiError(
                401,
                "unauthorized",
                "send the header 'Authorization: Bearer <token>'",
                headers=_CHALLENGE,
            )
        scheme, _, token = authorization.strip().partition(" ")
        token = token.strip()
        if scheme.lower() != "bearer" or not token:
            raise ApiError(
                401,
                "unauthorized",
                "the Authorization header must be 'Bearer <token>'",
                headers=_CHALLENGE,
            )
        if not self.accepts(token):
            raise ApiError(403, "forbidden", "the bearer token is not accepted")

    async def guard(
        self, connection: ASGIConnection[Any, Any, Any, Any], handler: BaseRouteHandler
    ) -> None:
        """Litestar guard: enforce a token unless the route is marked public.

        A coroutine, because litestar runs a plain-function guard in a worker thread: one
        thread hop per request for a check that takes microseconds.
        """
        if handler.opt.get("public"):
            return
        self.check(connection.headers.get("authorization"))
