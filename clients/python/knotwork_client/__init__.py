"""Python client for the knotwork collinearity-diagnostics service."""

__all__: list[str] = []
