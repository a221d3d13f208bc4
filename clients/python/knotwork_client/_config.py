"""Configuration value objects: timeouts and the retry policy, finite and safe by default."""

from __future__ import annotations

import email.utils
import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import httpx

__all__ = ["DEFAULT_ARROW_CELLS", "DEFAULT_TIMEOUT", "Retry", "parse_retry_after"]

#: Connect within 5 s; 60 s for the service to answer (it applies its own per-request limit).
DEFAULT_TIMEOUT = httpx.Timeout(60.0, connect=5.0)

#: Tables with at least this many cells (rows x columns) go as an Arrow IPC stream when pyarrow
#: is installed; smaller ones go as JSON, which is simpler to read in logs and proxies.
DEFAULT_ARROW_CELLS = 100_000


@dataclass(frozen=True, slots=True)
class Retry:
    """When and how long to wait before sending a request again.

    A request is retried when the connection fails (connect error or timeout, a connection
    dropped before the answer) or the service answers with one of ``statuses`` (429 and 503:
    saturated, come back later). No other answer is retried: a 4xx means the request itself is
    at fault and would fail again. Computations are stateless, so sending again is safe.

    Attributes
    ----------
    attempts
        Tries in all, the first included (1 disables retries).
    backoff
        Base delay in seconds before the first retry; doubled at each further retry.
    max_delay
        Cap on one computed delay, in seconds (a longer ``Retry-After`` is still honoured when
        it fits in ``total``).
    total
        Budget in seconds for the whole call, waits included: no retry starts if its wait would
        end beyond it.
    jitter
        Randomize each delay within [delay / 2, delay] ("equal jitter") so that many clients
        backing off together do not return together.
    statuses
        Status codes that are retried.

    Notes
    -----
    The wait before retry ``i`` (1-based) is ``d_i = min(max_delay, backoff * 2**(i - 1))``,
    jittered as ``d_i * (0.5 + 0.5 u)`` with ``u`` uniform on [0, 1); when the answer carries
    ``Retry-After: s``, the wait is ``max(s, d_i)``.
    """

    attempts: int = 4
    backoff: float = 0.5
    max_delay: float = 8.0
    total: float = 60.0
    jitter: bool = True
    statuses: frozenset[int] = field(default=frozenset({429, 503}))

    def __post_init__(self) -> None:
        if self.attempts < 1:
            raise ValueError(f"Retry.attempts must be at least 1, got {self.attempts}")
        for name in ("backoff", "max_delay", "total"):
            value = getattr(self, name)
            if not (math.isfinite(value) and value >= 0):
                raise ValueError(f"Retry.{name} must be a finite number >= 0, got {value!r}")

    def delay(
        self, retry_number: int, retry_after: float | None, uniform: Callable[[], float]
    ) -> float:
        """Seconds to wait before retry number ``retry_number`` (1 for the first retry)."""
        base = min(self.max_delay, self.backoff * 2.0 ** (retry_number - 1))
        wait = base * (0.5 + 0.5 * uniform()) if self.jitter else base
        if retry_after is not None:
            wait = max(wait, retry_after)
        return wait


def parse_retry_after(value: str | None, now: Callable[[], float] = time.time) -> float | None:
    """Seconds asked for by a ``Retry-After`` header (delay-seconds or an HTTP date), or None.

    RFC 9110 section 10.2.3 allows both forms; a date in the past means "now" (0 s). A value
    that is neither is ignored rather than trusted.
    """
    if value is None:
        return None
    text = value.strip()
    if text.isdigit():
        return float(text)
    try:
        when = email.utils.parsedate_to_datetime(text)
    except (TypeError, ValueError, IndexError):
        return None
    if when is None or when.tzinfo is None:
        return None
    return max(0.0, when.timestamp() - now())
