"""The demo's report in a real browser: headless Chromium (Debian's package), network cut off.

The page loads with no request besides itself and no console error (a blocked fetch or a
Content-Security-Policy violation would be one); every chart is drawn with a non-zero size; a
screenshot is not blank; printed on A4 and on Letter it takes a bounded number of pages. In CI
the browser must be there (.ci/run installs it); elsewhere the test is skipped when it is not.
"""

from __future__ import annotations

import io
import os
import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import msgspec
import pytest
from chromium import Browser, find
from PIL import Image
from report_bodies import JSON, demo_body

A4 = (8.27, 11.69)  # inches
LETTER = (8.5, 11.0)
#: Pages the demo may take when printed: its sections and charts fit in well under this.
MAX_PAGES = 14


@pytest.fixture(scope="module")
def browser(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Browser]:
    executable = find()
    if executable is None:
        if os.environ.get("CI"):
            pytest.fail(
                "chromium is required in CI; .ci/run installs it (apt-get install chromium)"
            )
        pytest.skip("chromium is not installed here (apt-get install chromium; .ci/run does)")
    started = Browser(executable, tmp_path_factory.mktemp("chromium-profile"))
    try:
        yield started
    finally:
        started.close()


@pytest.fixture(scope="module")
def loaded(client: Any, browser: Browser, tmp_path_factory: pytest.TempPathFactory) -> Browser:
    response = client.post(
        "/v1/report", content=msgspec.json.encode(demo_body()), headers={"Content-Type": JSON}
    )
    assert response.status_code == 200, response.text
    path = tmp_path_factory.mktemp("report") / "demo.html"
    path.write_bytes(response.content)
    browser.load(path.as_uri())
    browser.url = path.as_uri()  # type: ignore[attr-defined]
    return browser


def _pages(pdf: bytes) -> int:
    # Each page is one object of type /Page (the page tree's nodes are /Pages).
    return len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", pdf))


def test_the_page_loads_alone_and_quietly(loaded: Browser) -> None:
    url = loaded.url  # type: ignore[attr-defined]
    assert [u for u in loaded.requests() if u != url] == []
    assert loaded.console_errors() == []
    assert loaded.evaluate("document.title") == "Collinearity report"


def test_every_chart_is_drawn(loaded: Browser) -> None:
    sizes = loaded.evaluate(
        "[...document.querySelectorAll('svg.chart')].map(s => {"
        "const r = s.getBoundingClientRect(); return [r.width, r.height]; })"
    )
    assert len(sizes) == 5
    assert all(width > 200 and height > 50 for width, height in sizes), sizes
    # Each chart's accessible name is its title.
    names = loaded.evaluate(
        "[...document.querySelectorAll('svg.chart')].map(s => "
        "document.getElementById(s.getAttribute('aria-labelledby').split(' ')[0]).textContent)"
    )
    assert names[0].startswith("Variance inflation")


def test_a_screenshot_is_not_blank(loaded: Browser) -> None:
    image = Image.open(io.BytesIO(loaded.screenshot())).convert("RGB")
    assert image.width > 500 and image.height > 2000  # the whole page
    colours = image.getcolors(maxcolors=1 << 20)
    assert colours is not None and len(colours) > 16
    # Not one colour with specks: the background is at most 97 % of the pixels.
    assert max(count for count, _ in colours) < 0.97 * image.width * image.height


@pytest.mark.parametrize("paper", [A4, LETTER], ids=["A4", "Letter"])
def test_printing_takes_a_bounded_number_of_pages(loaded: Browser, paper: tuple[float, float],
                                                  tmp_path: Path) -> None:  # fmt: skip
    pdf = loaded.pdf(*paper)
    assert pdf.startswith(b"%PDF-")
    assert 2 <= _pages(pdf) <= MAX_PAGES
