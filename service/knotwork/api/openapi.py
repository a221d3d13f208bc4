"""Write or check the committed OpenAPI document.

Usage::

    python -m knotwork.api.openapi            # write openapi/openapi.json
    python -m knotwork.api.openapi --check    # exit 1 if the committed copy is out of date
    python -m knotwork.api.openapi PATH       # write elsewhere

The document is built from a default application (no tokens, default limits), so it does not
depend on the environment it is generated in.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from knotwork.settings import Settings

__all__ = ["DEFAULT_PATH", "main", "render"]

#: Where the document is committed, relative to the repository root.
DEFAULT_PATH = Path("openapi/openapi.json")


def render() -> str:
    """The OpenAPI document of a default application, as stable, indented JSON text."""
    from knotwork.api import create_app, openapi_document

    document: dict[str, Any] = openapi_document(create_app(Settings(concurrency=1)))
    return json.dumps(document, indent=2, sort_keys=False, ensure_ascii=False) + "\n"


def main(argv: list[str] | None = None) -> int:
    """Command-line entry point; returns the exit status."""
    parser = argparse.ArgumentParser(prog="python -m knotwork.api.openapi", description=__doc__)
    parser.add_argument("path", nargs="?", type=Path, default=DEFAULT_PATH)
    parser.add_argument("--check", action="store_true", help="compare instead of writing")
    args = parser.parse_args(argv)
    text = render()
    if args.check:
        current = args.path.read_text(encoding="utf-8") if args.path.exists() else ""
        if current != text:
            print(
                f"{args.path} is out of date; run: python -m knotwork.api.openapi", file=sys.stderr
            )
            return 1
        print(f"{args.path} is up to date")
        return 0
    args.path.parent.mkdir(parents=True, exist_ok=True)
    args.path.write_text(text, encoding="utf-8")
    print(f"wrote {args.path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
