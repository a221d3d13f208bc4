"""The installed distribution's version, stated once in its pyproject.toml."""

from importlib.metadata import version

VERSION = version("knotwork-client")
