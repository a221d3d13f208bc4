"""Typed results: the contract's records, under the client's names, with pandas conveniences.

The records of an answer are declared once, in :mod:`knotwork_contract` (the service's core
builds the same types); this module names them for the client (``Variable`` is the contract's
``VariableInflation``, ``Term`` its ``TermInflation``, ``Component`` its ``Components`` and
``ResultWarning`` its ``Notice``; ``Uncertainty`` and the option Struct ``UncertaintyOptions``
keep their names) and adds to :class:`Assessment` what needs pandas. Unknown
fields are ignored on decoding, so a newer service may add fields without breaking an older
client; a field an answer lacks takes the contract's default (a number NaN, a list empty, an
optional part None). A VIF that is not finite (an aliased variable) arrives as ``None``
together with ``aliased=True``. Lists in a decoded answer are Python lists.

The ``to_frame()`` helpers need pandas (``pip install knotwork-client[pandas]``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import knotwork_contract
from knotwork_contract import Components as Component
from knotwork_contract import (
    Conditioning,
    Dependency,
    FarrarGlauber,
    ModelFit,
    Problem,
    ProblemDocument,
    Removal,
    RemovalStep,
    Ridge,
    RidgeChoice,
    RidgePoint,
    Tangle,
    Tests,
    Uncertainty,
    UncertaintyOptions,
)
from knotwork_contract import Notice as ResultWarning
from knotwork_contract import TermInflation as Term
from knotwork_contract import VariableInflation as Variable

__all__ = [
    "Assessment",
    "Component",
    "Conditioning",
    "Dependency",
    "FarrarGlauber",
    "FieldError",
    "ModelFit",
    "ProblemDetails",
    "Removal",
    "RemovalStep",
    "ResultWarning",
    "Ridge",
    "RidgeChoice",
    "RidgePoint",
    "Tangle",
    "Term",
    "Tests",
    "Uncertainty",
    "UncertaintyOptions",
    "Variable",
]


def _pandas() -> Any:
    try:
        import pandas
    except ImportError as exc:  # pragma: no cover - exercised only without pandas
        raise ImportError("to_frame() needs pandas: pip install 'knotwork-client[pandas]'") from exc
    return pandas


class Assessment(knotwork_contract.Assessment, frozen=True):
    """The service's answer to one model: every diagnostic that was asked for.

    The fields are the contract's (:class:`knotwork_contract.Assessment`); this class adds the
    largest VIF and pandas tables of the variables, the removal steps and the ridge trace.
    """

    @property
    def max_vif(self) -> float:
        """The largest VIF (``inf`` when any variable is aliased, ``nan`` if none)."""
        if any(v.aliased or v.vif is None for v in self.variables):
            return math.inf
        return max((v.vif for v in self.variables if v.vif is not None), default=math.nan)

    def to_frame(self) -> Any:
        """Per-variable table as a DataFrame indexed by name (``vif`` NaN when aliased).

        Under a GLM family (``model`` is set) a column ``design_vif`` holds the plain
        design's VIF beside ``vif``, the VIF weighted at the fit. With ``uncertainty`` in the
        answer it also has ``vif_low`` and ``vif_high`` (the ends
        of ``vif_interval``), ``threshold_p_value`` (normal), ``share_above_threshold`` and
        ``share_dropped`` (bootstrap); a value the method does not give is NaN.
        """
        pd = _pandas()
        vs = self.variables
        columns: dict[str, list[Any]] = {
            "vif": [_f(v.vif) for v in vs],
            "tolerance": [_f(v.tolerance) for v in vs],
            "r_squared": [_f(v.r_squared) for v in vs],
            "se_inflation": [_f(v.se_inflation) for v in vs],
            "above_threshold": [v.above_threshold for v in vs],
            "aliased": [v.aliased for v in vs],
        }
        if self.model is not None:
            columns["design_vif"] = [_f(v.design_vif) for v in vs]
        if self.uncertainty is not None:
            columns["vif_low"] = [_end(v.vif_interval, 0) for v in vs]
            columns["vif_high"] = [_end(v.vif_interval, 1) for v in vs]
            columns["threshold_p_value"] = [_f(v.threshold_p_value) for v in vs]
            columns["share_above_threshold"] = [_f(v.share_above_threshold) for v in vs]
            columns["share_dropped"] = [_f(v.share_dropped) for v in vs]
        return pd.DataFrame(columns, index=pd.Index([v.name for v in vs], name="name"))

    def terms_frame(self) -> Any:
        """Per-term table (multi-column terms) as a DataFrame indexed by term name.

        Columns ``df``, ``gvif``, ``gvif_scaled``, ``above_threshold``, ``aliased``; with a
        bootstrap ``uncertainty`` also ``gvif_low``, ``gvif_high``, ``gvif_scaled_low``,
        ``gvif_scaled_high``, ``share_above_threshold`` and ``share_dropped``.
        """
        pd = _pandas()
        ts = self.terms
        columns: dict[str, list[Any]] = {
            "df": [t.df for t in ts],
            "gvif": [_f(t.gvif) for t in ts],
            "gvif_scaled": [_f(t.gvif_scaled) for t in ts],
            "above_threshold": [t.above_threshold for t in ts],
            "aliased": [t.aliased for t in ts],
        }
        if self.uncertainty is not None:
            columns["gvif_low"] = [_end(t.gvif_interval, 0) for t in ts]
            columns["gvif_high"] = [_end(t.gvif_interval, 1) for t in ts]
            columns["gvif_scaled_low"] = [_end(t.gvif_scaled_interval, 0) for t in ts]
            columns["gvif_scaled_high"] = [_end(t.gvif_scaled_interval, 1) for t in ts]
            columns["share_above_threshold"] = [_f(t.share_above_threshold) for t in ts]
            columns["share_dropped"] = [_f(t.share_dropped) for t in ts]
        return pd.DataFrame(columns, index=pd.Index([t.name for t in ts], name="term"))

    def removal_frame(self) -> Any:
        """The removal steps as a DataFrame indexed by step number, from 1.

        Columns ``drop``, ``vif`` and ``max_vif_after``; empty when removal was not computed.
        """
        pd = _pandas()
        steps = self.removal.steps if self.removal is not None else ()
        return pd.DataFrame(
            {
                "drop": [s.drop for s in steps],
                "vif": [_f(s.vif) for s in steps],
                "max_vif_after": [_f(s.max_vif_after) for s in steps],
            },
            index=pd.RangeIndex(1, len(steps) + 1, name="step"),
        )

    def ridge_frame(self) -> Any:
        """The ridge trace as a DataFrame indexed by k; empty when ridge was not computed.

        Columns ``max_vif`` and ``effective_df``, then ``vif[<name>]`` per variable and, with a
        response, ``coef[<name>]``; an answer of ``detail`` ``"summary"`` carries the first
        two only, at eight k of the grid.
        """
        pd = _pandas()
        trace = self.ridge.trace if self.ridge is not None else ()
        names = [v.name for v in self.variables]
        rows = []
        for t in trace:
            row: dict[str, Any] = {"max_vif": _f(t.max_vif), "effective_df": _f(t.effective_df)}
            row.update({f"vif[{n}]": _f(v) for n, v in zip(names, t.vif, strict=False)})
            if t.coefficients is not None:
                row.update(
                    {f"coef[{n}]": _f(c) for n, c in zip(names, t.coefficients, strict=False)}
                )
            rows.append(row)
        return pd.DataFrame(rows, index=pd.Index([t.k for t in trace], name="k"))


class ProblemDetails(ProblemDocument, frozen=True, kw_only=True):
    """A problem document (RFC 9457) as the service sends it for every error.

    The contract's :class:`~knotwork_contract.ProblemDocument`, under the client's name.
    """


#: One field the service objected to (``pointer``, ``reason``): the contract's record.
FieldError = Problem


def _f(value: float | None) -> float:
    return math.nan if value is None else float(value)


def _end(interval: Sequence[float] | None, which: int) -> float:
    return math.nan if interval is None else float(interval[which])
