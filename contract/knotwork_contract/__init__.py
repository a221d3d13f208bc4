"""The knotwork wire contract, shared by the service and its clients.

Everything a request may contain and every record of an answer is declared here once; the
service's decoders, its core's results, its OpenAPI document and the client's local checks and
decoders are derived from these declarations.
"""

from ._pointers import escape, join, msgspec_fault
from ._results import (
    RESULT_TYPES,
    Assessment,
    Comparison,
    Components,
    Conditioning,
    Dependency,
    FarrarGlauber,
    Notice,
    RemedyRow,
    Removal,
    RemovalStep,
    RepairReport,
    Ridge,
    RidgeChoice,
    RidgePoint,
    StillHigh,
    Tangle,
    TermInflation,
    Tests,
    VariableF,
    VariableInflation,
)

__all__ = [
    "RESULT_TYPES",
    "Assessment",
    "Comparison",
    "Components",
    "Conditioning",
    "Dependency",
    "FarrarGlauber",
    "Notice",
    "RemedyRow",
    "Removal",
    "RemovalStep",
    "RepairReport",
    "Ridge",
    "RidgeChoice",
    "RidgePoint",
    "StillHigh",
    "Tangle",
    "TermInflation",
    "Tests",
    "VariableF",
    "VariableInflation",
    "escape",
    "join",
    "msgspec_fault",
]
