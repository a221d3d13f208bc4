"""What deploy/Containerfile leaves out of the image is nothing the service needs.

The recipe prunes the runtime venv: whole distributions that nothing imports at run time, and
all of Swagger UI but the files the docs page loads. deploy/image-check.sh proves the built
image end to end; these tests catch the same mistakes in seconds, without an engine, when the
service changes: a new import of something the image leaves out, or a docs page that links
another asset.
"""

from __future__ import annotations

import ast
import importlib.metadata
import re
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path, PurePosixPath

from litestar.testing import TestClient

from knotwork.api import create_app

ROOT = Path(__file__).resolve().parents[2]
CONTAINERFILE = ROOT / "deploy" / "Containerfile"
SERVICE = ROOT / "service" / "knotwork"
#: The installers go too; nothing imports them at run time.
INSTALLERS = {"pip", "setuptools"}


def _recipe() -> str:
    return CONTAINERFILE.read_text()


def _uninstalled() -> set[str]:
    """Distributions the runtime stage uninstalls after installing the service."""
    names: set[str] = set()
    for command in re.findall(r"pip uninstall --yes --quiet(.*?)&&", _recipe(), flags=re.S):
        names |= {word.lower() for word in command.split() if word != "\\"}
    return names - INSTALLERS


def _modules_of(distributions: set[str]) -> set[str]:
    """Top-level import names of those distributions (as installed here)."""
    normal = {re.sub(r"[-_.]+", "-", name) for name in distributions}
    return {
        module
        for module, owners in importlib.metadata.packages_distributions().items()
        if any(re.sub(r"[-_.]+", "-", owner.lower()) in normal for owner in owners)
    }


def _removed_subpackages() -> set[str]:
    """Dotted names of the packages the recipe deletes from inside a distribution."""
    paths = re.findall(r'"\$site"/((?:scipy|numpy|fontTools)/[A-Za-z_]+)(?=[\s\\])', _recipe())
    return {path.replace("/", ".") for path in paths}


def _service_imports() -> set[str]:
    """Every absolute module name the service's code imports, at the top or in a function."""
    names: set[str] = set()
    for path in SERVICE.rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
            if isinstance(node, ast.Import):
                names |= {alias.name for alias in node.names}
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names.add(node.module)
                names |= {f"{node.module}.{alias.name}" for alias in node.names}
    return names


def test_the_recipe_leaves_things_out() -> None:
    # The parsing below must find the lists, or the next test would pass vacuously.
    assert {"faker", "polyfactory"} <= _uninstalled()
    assert _modules_of({"faker"}) == {"faker"}


def test_the_service_imports_nothing_the_image_leaves_out() -> None:
    imported = _service_imports()
    assert "numpy" in imported and "litestar" in imported
    gone = _modules_of(_uninstalled()) | _removed_subpackages()
    clashes = sorted(
        name for name in imported if any(name == g or name.startswith(g + ".") for g in gone)
    )
    assert not clashes, (
        f"the service imports {clashes}, which deploy/Containerfile leaves out of the image"
    )


class _Links(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.links: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.links += [value for name, value in attrs if name in ("src", "href") and value]


def test_the_swagger_ui_files_kept_are_the_ones_the_docs_page_loads() -> None:
    match = re.search(r'find "\$swagger" -type f((?:\s+\\?\s*! -name \S+)+)\s+-delete', _recipe())
    assert match, "the recipe no longer prunes Swagger UI the way this test reads it"
    kept = set(re.findall(r"! -name (\S+)", match.group(1)))
    with TestClient(create_app()) as client:
        parser = _Links()
        parser.feed(client.get("/docs").text)
    loaded = {PurePosixPath(link).name for link in parser.links}
    assert loaded == kept


def test_drawing_a_report_loads_nothing_the_image_leaves_out() -> None:
    # matplotlib and fontTools are imported by matplotlib's own code, which the static reading
    # above does not see: draw the demo's report in a fresh process and look at what it loaded.
    gone = {name for name in _removed_subpackages() if name.startswith("fontTools.")}
    assert "fontTools.ttLib" in gone  # the parsing found the list
    script = (
        "import sys, datetime, msgspec\n"
        "from knotwork.codecs import Limits, decode_assess, run\n"
        "from knotwork.demo import garden_centres, request_body\n"
        "from knotwork.report import render_report\n"
        "body = msgspec.json.encode(request_body(garden_centres(240, 7), 5.0))\n"
        "render_report(run(decode_assess(body, Limits()), full=True), datetime.datetime.now())\n"
        "print('\\n'.join(sorted(sys.modules)))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", script], capture_output=True, text=True, check=True, timeout=300
    )
    loaded = set(done.stdout.split())
    assert "matplotlib.backends.backend_svg" in loaded
    clashes = sorted(m for m in loaded if any(m == g or m.startswith(g + ".") for g in gone))
    assert not clashes, f"a report loads {clashes}, which deploy/Containerfile leaves out"
    # The fonts kept include the one the charts' layout measures with.
    kept = re.search(r"-name '\*\.ttf'((?:\s+\\?\s*! -name \S+)+)\s+-delete", _recipe())
    assert kept is not None and "'DejaVuSans.ttf'" in kept.group(1)
