"""The knotwork wire contract, shared by the service and its clients.

Everything a request may contain is declared here once; the service's decoders, its OpenAPI
document and the client's local checks are derived from these declarations.
"""

from ._pointers import escape, join, msgspec_fault

__all__ = ["escape", "join", "msgspec_fault"]
