"""knotwork: collinearity diagnostics for regression designs."""

from importlib.metadata import version

#: The installed distribution's version (stated once, in pyproject.toml).
__version__ = version("knotwork")
