"""tnsim: tensor-network contraction for wide, shallow quantum circuits."""

from .circuit import Circuit, Operation
from .errors import (
    CheckpointError,
    InputError,
    PlanningError,
    QasmError,
    ResourceLimitError,
    TnsimError,
)

__all__ = [
    "Circuit",
    "Operation",
    "TnsimError",
    "InputError",
    "QasmError",
    "PlanningError",
    "ResourceLimitError",
    "CheckpointError",
]
__version__ = "0.1.0"
