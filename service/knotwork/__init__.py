"""knotwork: collinearity diagnostics for regression designs."""

__version__ = "0.1.0"
