"""Service configuration, read once from ``KNOTWORK_*`` environment variables.

:class:`Settings` is a frozen value object with safe defaults. :meth:`Settings.from_env` reads
every variable, checks all of them and raises one :class:`SettingsError` that lists every
problem, so an operator fixes a deployment in one round. Messages name the variable, say what
was expected and what came; they never repeat a token.

Variables (defaults in brackets):

``KNOTWORK_TOKENS_FILE``       file with one bearer token a line; blank lines and ``#`` comments
                               are skipped [none]
``KNOTWORK_TOKENS``            comma-separated bearer tokens, added to those of the file [none]
``KNOTWORK_ALLOW_OPEN``        ``true`` permits running without tokens on a non-loopback
                               address [false]
``KNOTWORK_MAX_BODY_BYTES``    largest request body, in bytes [100663296 = 96 MiB: a p = 2,000
                               correlation matrix in JSON at full precision is about 84 MB]
``KNOTWORK_MAX_CELLS``         largest input, in numbers: rows x columns of a table, p x p of a
                               matrix [10000000]
``KNOTWORK_MAX_COLUMNS``       most predictors (columns, or names of a matrix) [2000]
``KNOTWORK_MAX_BATCH_ITEMS``   most items in one batch request [500]
``KNOTWORK_WORKERS``           server processes [1]
``KNOTWORK_CONCURRENCY``       assessments computed at once in each process [usable cores
                               divided by workers, at least 1]
``KNOTWORK_QUEUE``             requests allowed to wait for a free slot before 503 [2 x
                               concurrency]
``KNOTWORK_REQUEST_TIMEOUT_S`` time limit for decoding and computing one request, seconds [30]
``KNOTWORK_RETRY_AFTER_S``     the Retry-After advice, in whole seconds, on 503 [1]
``KNOTWORK_BLAS_THREADS``      BLAS threads per process [1: fastest in our measurements]
``KNOTWORK_LOG_LEVEL``         ``debug``, ``info``, ``warning`` or ``error`` [info]
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["Settings", "SettingsError", "usable_cores"]

#: Input limits by default, stated once: the settings and the codecs' limits use these.
DEFAULT_MAX_BODY_BYTES = 96 * 1024 * 1024
DEFAULT_MAX_CELLS = 10_000_000
DEFAULT_MAX_COLUMNS = 2000
DEFAULT_MAX_BATCH_ITEMS = 500

#: Shortest bearer token accepted: shorter ones are guessable.
MIN_TOKEN_LENGTH = 16

_LOG_LEVELS = ("debug", "info", "warning", "error")
_TRUE = ("1", "true", "yes", "on")
_FALSE = ("0", "false", "no", "off", "")


class SettingsError(ValueError):
    """The environment does not describe a usable configuration.

    ``problems`` lists one sentence per wrong variable; ``str()`` joins them.
    """

    def __init__(self, problems: list[str]) -> None:
        self.problems = tuple(problems)
        super().__init__("invalid settings:\n  " + "\n  ".join(self.problems))


def _cgroup_cpu_limit(path: str = "/sys/fs/cgroup/cpu.max") -> float | None:
    """The CPU quota of this process's cgroup (v2) in cores, or None when there is none.

    In a container with a CPU limit (``resources.limits.cpu`` in Kubernetes) the affinity mask
    still shows every core of the node; the quota is what the process may really use.
    """
    try:
        with open(path, encoding="ascii") as f:
            quota, period = f.read().split()[:2]
    except (OSError, ValueError):
        return None
    if quota == "max":
        return None
    try:
        return float(quota) / float(period)
    except (ValueError, ZeroDivisionError):
        return None


def usable_cores() -> int:
    """CPU cores this process may run on: its affinity mask, capped by a cgroup CPU quota."""
    try:
        cores = max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - platforms without affinity
        cores = max(1, os.cpu_count() or 1)
    limit = _cgroup_cpu_limit()
    if limit is not None:
        cores = max(1, min(cores, int(limit + 0.5)))
    return cores


@dataclass(frozen=True, slots=True, kw_only=True)
class Settings:
    """Validated service configuration (see the module docstring for the variables).

    Attributes
    ----------
    tokens
        Accepted bearer tokens; empty means the service runs without authentication.
    allow_open
        Whether running without tokens on a non-loopback address is allowed.
    max_body_bytes, max_cells, max_columns, max_batch_items
        Input limits; beyond them the service answers 413.
    workers
        Server processes.
    concurrency
        Assessments computed at the same time in one process (threads).
    queue
        Requests that may wait for a computing slot; one more answers 503 with Retry-After.
        None (the default) means twice ``concurrency``.
    request_timeout_s
        Time limit for decoding and computing one request.
    retry_after_s
        Seconds suggested in the Retry-After header of a 503.
    blas_threads
        BLAS threads per process.
    log_level
        Lowest level logged.
    """

    tokens: tuple[str, ...] = field(default=(), repr=False)
    allow_open: bool = False
    max_body_bytes: int = DEFAULT_MAX_BODY_BYTES
    max_cells: int = DEFAULT_MAX_CELLS
    max_columns: int = DEFAULT_MAX_COLUMNS
    max_batch_items: int = DEFAULT_MAX_BATCH_ITEMS
    workers: int = 1
    concurrency: int = field(default_factory=usable_cores)
    queue: int | None = None
    request_timeout_s: float = 30.0
    retry_after_s: int = 1
    blas_threads: int = 1
    log_level: str = "info"

    def __post_init__(self) -> None:
        if self.queue is None:
            object.__setattr__(self, "queue", 2 * self.concurrency)

    @property
    def open(self) -> bool:
        """True when no token is configured, so every route is open."""
        return not self.tokens

    @classmethod
    def from_env(cls, environ: Mapping[str, str] | None = None) -> Settings:
        """Read and validate the ``KNOTWORK_*`` variables of ``environ`` (default: os.environ).

        Raises
        ------
        SettingsError
            Listing every variable that is wrong, each with what was expected.
        """
        env = os.environ if environ is None else environ
        # Every default is the field's own (the dataclass above states each once).
        d = cls()
        problems: list[str] = []
        reader = _Reader(env, problems)

        tokens = list(reader.tokens_file("KNOTWORK_TOKENS_FILE"))
        tokens += reader.token_list("KNOTWORK_TOKENS")
        allow_open = reader.boolean("KNOTWORK_ALLOW_OPEN", d.allow_open)
        max_body_bytes = reader.integer("KNOTWORK_MAX_BODY_BYTES", d.max_body_bytes, minimum=1024)
        max_cells = reader.integer("KNOTWORK_MAX_CELLS", d.max_cells, minimum=1)
        max_columns = reader.integer("KNOTWORK_MAX_COLUMNS", d.max_columns, minimum=1)
        max_batch_items = reader.integer("KNOTWORK_MAX_BATCH_ITEMS", d.max_batch_items, minimum=1)
        workers = reader.integer("KNOTWORK_WORKERS", d.workers, minimum=1, maximum=256)
        concurrency = reader.integer(
            "KNOTWORK_CONCURRENCY", max(1, usable_cores() // max(workers, 1)), minimum=1
        )
        queue = reader.integer("KNOTWORK_QUEUE", 2 * concurrency, minimum=0)
        timeout = reader.number("KNOTWORK_REQUEST_TIMEOUT_S", d.request_timeout_s, minimum=0.001)
        retry_after = reader.integer(
            "KNOTWORK_RETRY_AFTER_S", d.retry_after_s, minimum=1, maximum=3600
        )
        blas_threads = reader.integer(
            "KNOTWORK_BLAS_THREADS", d.blas_threads, minimum=1, maximum=256
        )
        log_level = reader.choice("KNOTWORK_LOG_LEVEL", d.log_level, _LOG_LEVELS)

        if problems:
            raise SettingsError(problems)
        # Duplicates (a token in both the file and the variable) are harmless but pointless.
        unique = tuple(dict.fromkeys(tokens))
        return cls(
            tokens=unique,
            allow_open=allow_open,
            max_body_bytes=max_body_bytes,
            max_cells=max_cells,
            max_columns=max_columns,
            max_batch_items=max_batch_items,
            workers=workers,
            concurrency=concurrency,
            queue=queue,
            request_timeout_s=timeout,
            retry_after_s=retry_after,
            blas_threads=blas_threads,
            log_level=log_level,
        )


class _Reader:
    """Parses single variables, appending a sentence to ``problems`` for each bad one."""

    def __init__(self, env: Mapping[str, str], problems: list[str]) -> None:
        self.env = env
        self.problems = problems

    def _raw(self, name: str) -> str | None:
        value = self.env.get(name)
        if value is None:
            return None
        value = value.strip()
        return value if value else None

    def integer(self, name: str, default: int, *, minimum: int, maximum: int | None = None) -> int:
        raw = self._raw(name)
        if raw is None:
            return default
        try:
            value = int(raw.replace("_", ""))
        except ValueError:
            self.problems.append(f"{name} must be a whole number, got {raw!r}")
            return default
        if value < minimum or (maximum is not None and value > maximum):
            bound = f"between {minimum} and {maximum}" if maximum is not None else f">= {minimum}"
            self.problems.append(f"{name} must be {bound}, got {value}")
            return default
        return value

    def number(self, name: str, default: float, *, minimum: float) -> float:
        raw = self._raw(name)
        if raw is None:
            return default
        try:
            value = float(raw)
        except ValueError:
            self.problems.append(f"{name} must be a number of seconds, got {raw!r}")
            return default
        if not (value >= minimum and value < float("inf")):
            self.problems.append(f"{name} must be a finite number >= {minimum}, got {raw!r}")
            return default
        return value

    def boolean(self, name: str, default: bool) -> bool:
        raw = self.env.get(name)
        if raw is None:
            return default
        value = raw.strip().lower()
        if value in _TRUE:
            return True
        if value in _FALSE:
            return False
        self.problems.append(f"{name} must be true or false (also 1/0, yes/no), got {raw!r}")
        return default

    def choice(self, name: str, default: str, allowed: tuple[str, ...]) -> str:
        raw = self._raw(name)
        if raw is None:
            return default
        value = raw.lower()
        if value not in allowed:
            self.problems.append(f"{name} must be one of {', '.join(allowed)}, got {raw!r}")
            return default
        return value

    def _check_token(self, token: str, where: str) -> bool:
        # Never echo the token itself: the message may end up in a log.
        if len(token) < MIN_TOKEN_LENGTH:
            self.problems.append(
                f"{where} is {len(token)} characters long; tokens need at least "
                f"{MIN_TOKEN_LENGTH} (generate one with: python -c 'import secrets; "
                "print(secrets.token_urlsafe(32))')"
            )
            return False
        if not token.isascii() or not token.isprintable() or any(c.isspace() for c in token):
            self.problems.append(f"{where} contains spaces or non-printable characters")
            return False
        return True

    def token_list(self, name: str) -> list[str]:
        raw = self._raw(name)
        if raw is None:
            return []
        tokens = []
        for i, part in enumerate(raw.split(","), start=1):
            token = part.strip()
            if not token:
                continue
            if self._check_token(token, f"{name}: token {i}"):
                tokens.append(token)
        return tokens

    def tokens_file(self, name: str) -> list[str]:
        raw = self._raw(name)
        if raw is None:
            return []
        path = Path(raw)
        try:
            text = path.read_text(encoding="utf-8")
        except FileNotFoundError:
            self.problems.append(f"{name} names {raw!r}, which does not exist")
            return []
        except (OSError, UnicodeDecodeError) as exc:
            self.problems.append(
                f"{name}: cannot read {raw!r} as UTF-8 text ({type(exc).__name__})"
            )
            return []
        tokens = []
        for number, line in enumerate(text.splitlines(), start=1):
            token = line.strip()
            if not token or token.startswith("#"):
                continue
            if self._check_token(token, f"{name}: line {number} of {raw!r}"):
                tokens.append(token)
        if not tokens and not self.problems:
            self.problems.append(f"{name} names {raw!r}, which holds no token")
        return tokens
