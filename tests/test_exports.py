"""Each package's public surface is explicit: a sorted __all__ of names that exist."""

from __future__ import annotations

import importlib

import pytest

PACKAGES = ["knotwork.core", "knotwork_client", "knotwork_contract"]


@pytest.mark.parametrize("name", PACKAGES)
def test_all_is_sorted_and_complete(name: str) -> None:
    module = importlib.import_module(name)
    exported = module.__all__
    # "isort-style", as ruff's RUF022 keeps it: CONSTANTS, then Classes, then functions.
    order = sorted(exported, key=lambda s: (not s.isupper(), not s[:1].isupper(), s))
    assert exported == order, f"{name}.__all__ must be sorted"
    for attr in exported:
        assert hasattr(module, attr), f"{name}.__all__ names a missing {attr!r}"
    public = {n for n in vars(module) if not n.startswith("_")}
    imported_modules = {n for n in public if type(getattr(module, n)).__name__ == "module"}
    assert public - imported_modules - {"annotations"} <= set(exported)


def test_core_imports_no_web_stack() -> None:
    # The shared contract (msgspec and numpy) is fine in the core; the web stack is not.
    import subprocess
    import sys

    code = (
        "import sys, knotwork.core; "
        "bad = [m for m in ('litestar', 'httpx', 'uvicorn', 'pyarrow', 'pandas') "
        "if m in sys.modules]; print(bad); sys.exit(1 if bad else 0)"
    )
    subprocess.run([sys.executable, "-c", code], check=True)
