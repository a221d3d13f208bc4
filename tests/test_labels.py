"""User-facing text uses our own labels: the scaled GVIF by name, and our own intercept label.

The scaled GVIF is GVIF to the power 1/(2 df) (Fox & Monette 1992); the text users receive
names it in words. The intercept's label in the conditioning basis is reserved (a column with
that name is refused, see tests/core/test_errors.py).
"""

from __future__ import annotations

import contextlib
import io
import pathlib

import msgspec
import pytest

from knotwork.core import INTERCEPT_NAME, Options, assess, from_frame
from knotwork.demo import garden_centres, main, render

ROOT = pathlib.Path(__file__).resolve().parents[1]
# The notations we must not show users, spelled here only so the test can look for them.
FOREIGN = ("GVIF^(", "(intercept)")


@pytest.fixture(scope="module")
def demo_answer():
    frame = garden_centres(240, 7)
    return assess(from_frame(frame, response="weekly_takings"), Options(threshold=5.0))


@pytest.mark.parametrize(
    "path", ["README.md", "clients/python/README.md", "openapi/openapi.json", "DEVELOPERS.md"]
)
def test_documents_use_our_labels(path):
    text = (ROOT / path).read_text()
    for label in FOREIGN:
        assert label not in text, f"{path} contains {label!r}"


def test_answers_and_printouts_use_our_labels(demo_answer):
    answer = msgspec.json.encode(demo_answer).decode()
    printed = render(demo_answer)
    for label in FOREIGN:
        assert label not in answer
        assert label not in printed
    assert demo_answer.conditioning is not None
    assert demo_answer.conditioning.names[0] == INTERCEPT_NAME == "<constant>"
    # The term line is laid out our own way, with the value to compare against.
    assert "term region (3 columns): GVIF 1.219, scaled 1.034, compare with 2.236" in printed


def test_command_line_help_uses_our_labels():
    from knotwork_client._cli import _parser

    text = _parser().format_help()
    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer), pytest.raises(SystemExit):
        main(["--help"])
    for label in FOREIGN:
        assert label not in text + buffer.getvalue()


def test_the_report_page_uses_our_labels():
    from datetime import UTC, datetime

    from knotwork.codecs import Limits, decode_assess, run
    from knotwork.demo import request_body
    from knotwork.report import render_report

    body = msgspec.json.encode(request_body(garden_centres(240, 7), 5.0))
    page = render_report(run(decode_assess(body, Limits()), full=True), datetime.now(UTC))
    for label in FOREIGN:
        assert label not in page
    assert "<constant>" not in page  # escaped wherever a name is shown
