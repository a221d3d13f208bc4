"""Checks of a report page without a browser: it parses, and it references nothing outside."""

from __future__ import annotations

import re
from html.parser import HTMLParser

#: Elements without an end tag in HTML.
VOID = frozenset(
    {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
     "track", "wbr"}
)  # fmt: skip
#: Elements that would fetch or run something: none may appear.
FORBIDDEN = frozenset(
    {"script", "link", "img", "iframe", "object", "embed", "video", "audio", "source", "image",
     "use-external", "base", "form", "frame"}
)  # fmt: skip


class Page(HTMLParser):
    """A strict reading: every element closed in order; the tags, attributes and text kept."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []
        self.feed(text)
        self.close()
        if self.stack:
            self.errors.append(f"unclosed: {self.stack}")

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))

    def handle_endtag(self, tag: str) -> None:
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
            return
        self.stack.pop()

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def outside_references(text: str, allowed: frozenset[str] = frozenset()) -> list[str]:
    """Everything in the page that could make a request, or names a place outside it.

    ``allowed``: links the page may hold (the index page's links to the reports beside it).
    """
    page = Page(text)
    found = [f"<{tag}>" for tag, _ in page.tags if tag in FORBIDDEN]
    for tag, attrs in page.tags:
        for name, value in attrs.items():
            linking = name in ("href", "src", "xlink:href", "srcset", "action", "poster", "data")
            inside = value is not None and (value.startswith("#") or value in allowed)
            if linking and not inside:
                found.append(f"<{tag} {name}={value!r}>")
    found += re.findall(r"url\((?!#)[^)]*\)", text)
    found += re.findall(r"@import[^;]*;", text)
    found += re.findall(r"[a-z]+://\S{0,40}", text)
    return found
