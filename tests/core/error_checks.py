"""The check that an input error names its field and says why, shared by the core's error tables."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from knotwork.core import KnotworkError


def assert_names_field(
    build: Callable[[], Any], cls: type[KnotworkError], pointer: str, fragment: str
) -> None:
    """``build()`` raises exactly ``cls``, whose first problem names ``pointer`` and the reason.

    Every core error is a ``KnotworkError`` and a ``ValueError``, and carries at least one
    problem; the first one is the field the case is about.
    """
    with pytest.raises(cls) as info:
        build()
    err = info.value
    assert type(err) is cls
    assert isinstance(err, KnotworkError) and isinstance(err, ValueError)
    assert err.problems, "every error carries at least one problem"
    assert err.problems[0].pointer == pointer
    assert fragment in err.problems[0].reason
