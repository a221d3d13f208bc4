"""The client as a package: its public surface, and its independence from the server."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

import knotwork_client

CLIENT_ROOT = Path(__file__).resolve().parents[2] / "clients" / "python"


def test_all_is_sorted_and_importable():
    names = knotwork_client.__all__

    def isort_style(name: str) -> tuple[int, str]:  # constants, then classes, then the rest
        return (0 if name.isupper() else 1 if name[0].isupper() else 2, name)

    assert names == sorted(names, key=isort_style)
    for name in names:
        assert hasattr(knotwork_client, name), name


def test_public_objects_are_documented():
    for name in knotwork_client.__all__:
        obj = getattr(knotwork_client, name)
        if callable(obj) and not name.isupper():
            assert obj.__doc__, f"{name} has no docstring"


def test_public_objects_live_in_private_modules():
    # The result records are the shared contract's, re-exported under the client's names.
    for name in knotwork_client.__all__:
        obj = getattr(knotwork_client, name)
        module = getattr(obj, "__module__", "knotwork_client._x")
        if isinstance(obj, type) or callable(obj):
            assert module.startswith(("knotwork_client._", "knotwork_contract._")), (name, module)


def _run_isolated(code: str) -> subprocess.CompletedProcess:
    """Run ``code`` in a fresh interpreter where the server package cannot be imported."""
    guard = textwrap.dedent(
        """
        import importlib.abc, sys

        class NoServer(importlib.abc.MetaPathFinder):
            def find_spec(self, name, path=None, target=None):
                if name == "knotwork" or name.startswith("knotwork."):
                    raise ImportError(f"the client imported the server package: {name}")
                return None

        sys.meta_path.insert(0, NoServer())
        """
    )
    env = {**os.environ, "PYTHONPATH": str(CLIENT_ROOT)}
    return subprocess.run(
        [sys.executable, "-c", guard + textwrap.dedent(code)],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )


def test_client_never_imports_the_server_package():
    done = _run_isolated(
        """
        import pkgutil, importlib, sys
        import knotwork_client
        for mod in pkgutil.iter_modules(knotwork_client.__path__):
            if mod.name != "__main__":
                importlib.import_module(f"knotwork_client.{mod.name}")
        import numpy as np
        s = knotwork_client.summarize((np.random.default_rng(0).normal(size=(50, 3)), list("abc")))
        s.to_input()
        assert not any(m == "knotwork" or m.startswith("knotwork.") for m in sys.modules)
        print("ok")
        """
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "ok"


def test_the_command_line_runs_without_the_server_package():
    done = _run_isolated(
        """
        from knotwork_client._cli import main
        try:
            main(["--help"])
        except SystemExit as exc:
            assert exc.code == 0
        """
    )
    assert done.returncode == 0, done.stderr
    assert "knotwork-screen" in done.stdout


def test_declared_dependencies_are_the_light_ones():
    tomllib = pytest.importorskip("tomllib")
    meta = tomllib.loads((CLIENT_ROOT / "pyproject.toml").read_text())["project"]
    required = sorted(d.split(">")[0].split("=")[0].split("[")[0] for d in meta["dependencies"])
    assert required == [
        "anyio",
        "httpx",
        "knotwork-contract",
        "msgspec",
        "numpy",
        "threadpoolctl",
        "tqdm",
    ]
    assert meta["scripts"] == {"knotwork-screen": "knotwork_client._cli:main"}
