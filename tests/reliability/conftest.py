"""Fixtures for the reliability tests: real servers on free loopback ports, started here.

The helpers live in the development harness (``knotwork_harness``: live servers, a
fault-injecting proxy, raw HTTP exchanges, memory readings, generated data), shared with the
bench scripts.
"""

from __future__ import annotations
