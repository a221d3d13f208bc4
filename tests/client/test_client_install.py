"""The client installs on its own: a wheel into a fresh virtual environment, no server.

Builds the wheels of clients/python and of the shared contract, installs them (and only their
declared dependencies, pinned by constraints.txt) into a new virtual environment without system
site-packages, and checks there that the client works while the server package, pandas,
pyarrow and dask are absent.
Needs the package index (about 20 s); marked slow.
"""

from __future__ import annotations

import re
import subprocess
import sys
import textwrap
import zipfile
from email.parser import Parser
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
CLIENT = REPO / "clients" / "python"
CONTRACT = REPO / "contract"

SMOKE = textwrap.dedent(
    """
    import importlib.util, sys
    for absent in ("knotwork", "pandas", "pyarrow", "dask", "litestar", "scipy"):
        assert importlib.util.find_spec(absent) is None, f"{absent} is installed"
    import httpx, msgspec, numpy as np
    import knotwork_client as kc

    rng = np.random.default_rng(1)
    x = rng.normal(size=(200, 3))
    x[:, 2] += x[:, 0]
    s = kc.summarize((x, ["a", "b", "c"]), response="c")
    doc = s.to_input()
    assert doc["kind"] == "moments" and doc["names"] == ["a", "b", "c"]

    def handler(request):
        body = msgspec.json.decode(request.content)
        assert body["input"]["kind"] == "moments"
        return httpx.Response(200, json={
            "variables": [{"name": n, "vif": 1.0, "above_threshold": False, "aliased": False}
                          for n in ("a", "b")],
            "n": 200, "p": 2, "input_kind": "moments"})

    with kc.Client("http://knotwork.test", transport=httpx.MockTransport(handler)) as c:
        result = c.assess(s)
    assert [v.name for v in result.variables] == ["a", "b"]
    try:
        result.to_frame()
    except ImportError as exc:
        assert "knotwork-client[pandas]" in str(exc)
    else:
        raise AssertionError("to_frame worked without pandas?")
    print("ok")
    """
)


def _run(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess:
    done = subprocess.run(args, capture_output=True, text=True, cwd=cwd, timeout=600)
    assert done.returncode == 0, f"{args}: {done.stdout[-2000:]}\n{done.stderr[-3000:]}"
    return done


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("wheel")
    _run(
        sys.executable,
        "-m",
        "pip",
        "wheel",
        "--quiet",
        "--disable-pip-version-check",
        "--no-deps",
        "-w",
        str(out),
        str(CLIENT),
        str(CONTRACT),
    )
    (found,) = out.glob("knotwork_client-*.whl")
    return found


@pytest.mark.slow
def test_wheel_declares_only_the_light_dependencies(wheel):
    with zipfile.ZipFile(wheel) as zf:
        meta_name = next(n for n in zf.namelist() if n.endswith(".dist-info/METADATA"))
        meta = Parser().parsestr(zf.read(meta_name).decode())
        names = zf.namelist()
    required = sorted(
        re.split(r"[;<>=!~ ]", r, maxsplit=1)[0]
        for r in meta.get_all("Requires-Dist")
        if "extra ==" not in r
    )
    # The wheel declares what the project file declares (that list is pinned, with the reason
    # for each name, in test_client_package.py).
    tomllib = pytest.importorskip("tomllib")
    project = tomllib.loads((CLIENT / "pyproject.toml").read_text())["project"]
    declared = sorted(re.split(r"[;<>=!~ \[]", r, maxsplit=1)[0] for r in project["dependencies"])
    assert required == declared
    assert not any(n.startswith("knotwork/") for n in names)
    assert "knotwork_client/py.typed" in names


@pytest.mark.slow
def test_installs_and_runs_in_a_fresh_environment(wheel, tmp_path):
    env = tmp_path / "venv"
    _run(sys.executable, "-m", "venv", str(env))
    python = env / "bin" / "python"
    _run(
        str(python),
        "-m",
        "pip",
        "install",
        "--quiet",
        "--disable-pip-version-check",
        "-c",
        str(REPO / "constraints.txt"),
        "--find-links",
        str(wheel.parent),
        str(wheel),
    )
    # Run from an empty folder so nothing from the repository is importable by accident.
    done = _run(str(python), "-c", SMOKE, cwd=tmp_path)
    assert done.stdout.strip() == "ok"
    helped = _run(str(env / "bin" / "knotwork-screen"), "--help", cwd=tmp_path)
    assert helped.stdout.startswith("usage: knotwork-screen")
