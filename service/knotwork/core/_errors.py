"""Exceptions raised by the numerical core.

Every exception the core raises for bad input subclasses :class:`ValueError`, so a plain
``except ValueError`` still catches it, and carries a list of :class:`Problem` entries that
say *where* (a JSON pointer relative to the input document, such as ``/columns/GNP`` or
``/matrix/2/3``) and *why*. The service's codecs translate the pointers into the caller's
request (:mod:`knotwork.codecs`), and the HTTP layer answers with the one problem document.

Hierarchy::

    KnotworkError (ValueError)
    ├── InputError            the input cannot be used as given
    │   ├── MissingValuesError    missing values under ``missing="reject"``
    │   ├── MatrixError           not a valid correlation or covariance matrix
    │   ├── TooFewDataError       too few observations or predictors
    │   └── FitError              a model cannot be fitted to the data (separation, no convergence)
    └── OptionError           an option is unknown, out of range or inconsistent with the input
"""

from __future__ import annotations

from knotwork_contract import Problem

# Problem is the contract's record, re-exported for the core's modules that raise with it.
__all__ = [
    "FitError",
    "InputError",
    "KnotworkError",
    "MatrixError",
    "MissingValuesError",
    "OptionError",
    "Problem",
    "TooFewDataError",
]


class KnotworkError(ValueError):
    """Base class of every error the core raises for bad input or options."""

    #: Stable slug of this kind of error; the HTTP layer builds the problem ``type`` from it.
    kind: str = "invalid-input"
    #: Which document the pointers refer to: ``"input"`` or ``"options"``.
    scope: str = "input"

    def __init__(self, message: str, problems: list[Problem] | tuple[Problem, ...] = ()) -> None:
        super().__init__(message)
        self.message = message
        self.problems: tuple[Problem, ...] = tuple(problems)

    @classmethod
    def at(cls, pointer: str, reason: str) -> KnotworkError:
        """Build an error with a single problem whose reason is also the message."""
        return cls(reason, [Problem(pointer, reason)])


class InputError(KnotworkError):
    """The input cannot be used as given."""

    kind = "invalid-input"


class MissingValuesError(InputError):
    """Missing values were found and the missing-value policy is ``reject``."""

    kind = "missing-values"


class MatrixError(InputError):
    """A matrix is not a valid correlation or covariance matrix."""

    kind = "invalid-matrix"


class TooFewDataError(InputError):
    """Too few observations or predictors for the diagnostics to exist."""

    kind = "too-few-data"


class FitError(InputError):
    """A model cannot be fitted to the data as given: its maximum-likelihood estimate does not
    exist (separation of a binary response) or the iteration did not converge."""

    kind = "fit-failed"


class OptionError(KnotworkError):
    """An option is unknown, out of range, or does not fit the input."""

    kind = "invalid-option"
    scope = "options"
