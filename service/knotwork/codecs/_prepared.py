"""Decoded requests, ready for the core: plain names, numbers and numpy arrays.

Every codec (JSON, Arrow IPC, Parquet) produces a :class:`Prepared`; :mod:`._convert` turns it
into a core summary and options. :class:`Origin` remembers where the request came from, so an
error the core reports against its own input document points into the request the client sent.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from knotwork.settings import DEFAULT_MAX_BATCH_ITEMS, DEFAULT_MAX_CELLS, DEFAULT_MAX_COLUMNS
from knotwork_contract import QUERY_PARAMETERS, AssessOptions, join

__all__ = [
    "CorrelationData",
    "EstimatesData",
    "Limits",
    "MomentsData",
    "Origin",
    "Prepared",
    "TableData",
]


@dataclass(frozen=True, slots=True)
class Limits:
    """Input limits from the settings; beyond them a request answers 413."""

    max_cells: int = DEFAULT_MAX_CELLS
    max_columns: int = DEFAULT_MAX_COLUMNS
    max_batch_items: int = DEFAULT_MAX_BATCH_ITEMS


@dataclass(frozen=True, slots=True, eq=False)
class TableData:
    """Rows, column by column: float64 arrays (NaN = missing) and categorical labels."""

    columns: dict[str, np.ndarray]
    categorical: dict[str, list[str | None]]
    response: str | None = None
    weights: str | None = None
    offset: str | None = None
    trials: str | None = None


@dataclass(frozen=True, slots=True, eq=False)
class CorrelationData:
    """A correlation matrix, its n, and optionally a response and terms."""

    names: list[str]
    matrix: list[list[float]]
    n: float
    response: tuple[str, list[float]] | None = None
    terms: dict[str, list[str]] | None = None


@dataclass(frozen=True, slots=True, eq=False)
class MomentsData:
    """Moments in one piece (n, means, covariance) or as parts to merge."""

    names: list[str]
    n: float | None = None
    means: list[float] | None = None
    covariance: list[list[float]] | None = None
    parts: list[tuple[float, list[float], list[list[float]]]] | None = None
    response: str | None = None
    terms: dict[str, list[str]] | None = None


@dataclass(frozen=True, slots=True, eq=False)
class EstimatesData:
    """A fitted model's estimates: coefficient names, their covariance, the intercept's name."""

    names: list[str]
    covariance: list[list[float]]
    intercept: str | None
    terms: dict[str, list[str]] | None = None
    n: float | None = None


# The query parameter that carries each option or column name, for requests whose options are
# in the query (the contract derives them from the Structs).
_OPTION_PARAMETERS = {"/".join(p.path): p.name for p in QUERY_PARAMETERS if p.path[0] != "input"}
_INPUT_PARAMETERS = tuple(p.path[1] for p in QUERY_PARAMETERS if p.path[0] == "input")
# A pointer to a whole nested option (``/uncertainty``) names its first parameter.
_GROUP_PARAMETERS: dict[str, str] = {}
for _p in QUERY_PARAMETERS:
    if _p.path[0] != "input":
        _GROUP_PARAMETERS.setdefault(_p.path[0], _p.name)


@dataclass(frozen=True, slots=True)
class Origin:
    """Where a request's input and options live, to translate the core's pointers.

    Attributes
    ----------
    base
        Pointer of the request document inside the body: ``""``, or ``/items/<i>`` in a batch.
    query
        True when options (and ``response``, ``weights``) came as query parameters and the
        input is a binary table: input pointers then name columns (``/columns/<name>``) and
        option pointers name parameters (``/query/<parameter>``).
    """

    base: str = ""
    query: bool = False

    def locate(self, scope: str, pointer: str) -> str:
        """The request pointer of ``pointer`` (relative to the core's input or options)."""
        if not self.query:
            return f"{self.base}/{'options' if scope == 'options' else 'input'}{pointer}"
        tokens = pointer.split("/")[1:] if pointer else []
        if scope == "options":
            if not tokens:
                return "/query"
            key = "/".join(tokens[:2])
            name = _OPTION_PARAMETERS.get(key) or _GROUP_PARAMETERS.get(tokens[0], tokens[0])
            return join("query", name)
        if tokens and tokens[0] in _INPUT_PARAMETERS:
            return join("query", tokens[0])
        return pointer


@dataclass(frozen=True, slots=True, eq=False)
class Prepared:
    """A decoded request: the data, the options and where they came from."""

    data: TableData | CorrelationData | MomentsData | EstimatesData
    options: AssessOptions
    origin: Origin = Origin()

    @property
    def kind(self) -> str:
        """``table``, ``correlation``, ``moments`` or ``estimates``."""
        if isinstance(self.data, TableData):
            return "table"
        if isinstance(self.data, EstimatesData):
            return "estimates"
        return "correlation" if isinstance(self.data, CorrelationData) else "moments"
