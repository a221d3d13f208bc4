"""JSON pointers (RFC 6901): escaping, joining and translating msgspec error paths."""

from __future__ import annotations

import re

import msgspec

__all__ = ["escape", "join", "msgspec_fault"]

# msgspec ends a validation message with " - at `<path>`" (or " - at `key` in `<path>`" when a
# dictionary key is wrong); the path is "$", then ".field", "[index]" or "[...]" (a dictionary
# value, whose key msgspec does not report).
_AT = re.compile(r" - at `(?:key` in `)?(?P<path>\$[^`]*)`$")
_STEP = re.compile(r"\.(?P<field>[A-Za-z_][A-Za-z0-9_]*)|\[(?P<index>\d+)\]|\[\.\.\.\]")
_REQUIRED = re.compile(r"^Object missing required field `(?P<field>[^`]+)`$")
_UNKNOWN = re.compile(r"^Object contains unknown field `(?P<field>[^`]+)`$")


def escape(token: str) -> str:
    """Escape one reference token (RFC 6901, section 3)."""
    return token.replace("~", "~0").replace("/", "~1")


def join(*tokens: str | int) -> str:
    """A pointer from unescaped tokens: ``join("columns", "a/b", 3) == "/columns/a~1b/3"``."""
    return "".join("/" + escape(str(t)) for t in tokens)


def msgspec_fault(error: msgspec.ValidationError, prefix: str = "") -> tuple[str, str]:
    """Translate a msgspec validation error into ``(pointer, reason)``.

    ``prefix`` is the pointer of the decoded document inside the request (for a column decoded
    on its own, ``/input/columns/<name>``). The path stops at a dictionary value msgspec does
    not name.
    """
    text = str(error)
    match = _AT.search(text)
    reason = text if match is None else text[: match.start()]
    path = "" if match is None else match.group("path")[1:]
    tokens: list[str] = []
    pos = 0
    complete = True
    while pos < len(path):
        step = _STEP.match(path, pos)
        if step is None or step.group(0) == "[...]":
            complete = False
            break
        tokens.append(step.group("field") or step.group("index"))
        pos = step.end()
    if complete and (match is None or not match.group(0).startswith(" - at `key`")):
        # A missing or unknown field belongs at the end of the pointer.
        for pattern in (_REQUIRED, _UNKNOWN):
            field = pattern.match(reason)
            if field is not None:
                tokens.append(field.group("field"))
    return prefix + join(*tokens), reason
