"""Provenance of an answer: the service version, the input's fingerprint, the options in force.

The fingerprint is the SHA-256 digest of a canonical form of the summary the diagnostics ran
on, together with the options. Rows sent as JSON, as an Arrow stream or as Parquet reach the
core by different decoders, and a summary made on another machine (or by the client, in parts)
may differ from another route's in the last bits (other BLAS kernels, another order of
summation). So every number of the canonical form is rounded first, to a precision far above
that rounding noise (about 1e-15 relative) and far below any change of the data that moves a
diagnostic:

- the correlation matrix (predictors, then the response) to ``DECIMALS`` decimals: its entries
  lie in [-1, 1], and an absolute rounding keeps a correlation that is zero up to rounding
  (1e-17 here, -2e-17 there) from changing the digest, which a relative one would not;
- the standard deviations and n to ``DIGITS`` significant digits;
- each mean in units of its standard deviation, to ``DECIMALS`` decimals (a mean that is zero up
  to rounding again must not count; a mean of a constant column, sd 0, to ``DIGITS`` digits).

Two summaries whose numbers straddle a rounding boundary still differ; with p = 50 (about 1,400
rounded numbers, each within 1e-15 of its twin) that takes a chance of about 1e-3. Every change
of a value in the data that moves a correlation by more than 1e-10 changes the digest.

The canonical form is the UTF-8 JSON header below (keys sorted, msgspec's shortest float text)
followed by the rounded arrays as little-endian float64 bytes, in the order the header lists
them; docs/contract.md states it for anyone who wants to recompute a fingerprint.
"""

from __future__ import annotations

import hashlib
from typing import Any

import msgspec
import numpy as np

from knotwork import __version__
from knotwork.core import Summary
from knotwork_contract import AssessOptions, Provenance

__all__ = [
    "DECIMALS",
    "DIGITS",
    "canonical_form",
    "fingerprint",
    "options_in_force",
    "provenance",
]

#: Decimals kept of correlations and of means in standard-deviation units.
DECIMALS = 10
#: Significant digits kept of n and the standard deviations.
DIGITS = 10


def _significant(values: np.ndarray) -> np.ndarray:
    """Round to ``DIGITS`` significant digits (0 stays 0), elementwise."""
    a = np.asarray(values, dtype=np.float64)
    magnitude = np.abs(a)
    exponent = np.floor(np.log10(np.where(magnitude > 0, magnitude, 1.0)))
    scale = 10.0 ** (DIGITS - 1 - exponent)
    # Equal mantissas give equal bits: the same division of the same integers.
    rounded: np.ndarray = np.round(a * scale) / scale
    return rounded + 0.0  # -0.0 becomes 0.0


def options_in_force(options: AssessOptions) -> dict[str, Any]:
    """Every option by its wire name, with its value after the contract's defaults."""
    built: dict[str, Any] = msgspec.to_builtins(options)
    return built


def canonical_form(summary: Summary, options: AssessOptions) -> bytes:
    """The bytes the fingerprint digests (see the module's docstring)."""
    arrays: list[tuple[str, np.ndarray]] = [
        ("correlation", np.round(np.asarray(summary.correlation, dtype=np.float64), DECIMALS)),
    ]
    sds = summary.all_sds
    if summary.means is not None and sds is not None:
        means = np.asarray(summary.means, dtype=np.float64)
        positive = sds > 0
        in_sd = np.round(means / np.where(positive, sds, 1.0), DECIMALS)
        standardized = np.where(positive, in_sd, _significant(means))
        arrays.append(("means_in_sd", standardized))
        arrays.append(("sd", _significant(sds)))
    header = {
        "form": "knotwork-summary-1",
        "names": list(summary.names),
        "response": summary.response,
        "terms": [[t.name, list(t.columns)] for t in summary.terms],
        "n": float(_significant(np.array([summary.n]))[0]),
        "decimals": DECIMALS,
        "digits": DIGITS,
        "arrays": [[name, list(a.shape)] for name, a in arrays],
        "options": options_in_force(options),
    }
    numbers = b"".join(np.ascontiguousarray(a + 0.0, dtype="<f8").tobytes() for _, a in arrays)
    return msgspec.json.encode(header, order="sorted") + b"\n" + numbers


def fingerprint(summary: Summary, options: AssessOptions) -> str:
    """``sha256:`` and the hex digest of :func:`canonical_form`."""
    return "sha256:" + hashlib.sha256(canonical_form(summary, options)).hexdigest()


def provenance(summary: Summary, options: AssessOptions) -> Provenance:
    """The provenance record of an answer computed from ``summary`` with ``options``."""
    return Provenance(
        service_version=__version__,
        fingerprint=fingerprint(summary, options),
        options=options_in_force(options),
    )
