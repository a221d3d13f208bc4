"""Test and bench harness for knotwork: live servers, fault injection, raw HTTP, memory, data.

Shared by the test suite and the bench scripts (a development distribution, never installed
in the image). Everything listens on and connects to 127.0.0.1 only.
"""

from pathlib import Path

#: The one address every server, proxy and client of the harness uses.
HOST = "127.0.0.1"
#: The repository (the harness is installed in development mode from it).
ROOT = Path(__file__).resolve().parents[2]
OPENAPI = ROOT / "openapi" / "openapi.json"
JSON = "application/json"

__all__ = ["HOST", "JSON", "OPENAPI", "ROOT"]
