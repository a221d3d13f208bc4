"""Fixtures for the reliability tests: real servers on free loopback ports, started here.

The helpers that start a server live in tests/e2e/e2e_support.py (shared with the end-to-end
tests); this folder's own helpers (a fault-injecting proxy, raw HTTP exchanges, memory
readings) live in rel_support.py.
"""

from __future__ import annotations

import sys
from pathlib import Path

_HERE = Path(__file__).resolve().parent
for folder in (_HERE, _HERE.parent / "e2e"):
    if str(folder) not in sys.path:
        sys.path.insert(0, str(folder))
