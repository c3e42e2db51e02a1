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
from .qasm import read_qasm, write_qasm
from .queries import amplitude, amplitudes
from .runconfig import run_options

__all__ = [
    "Circuit",
    "Operation",
    "amplitude",
    "amplitudes",
    "TnsimError",
    "InputError",
    "QasmError",
    "PlanningError",
    "ResourceLimitError",
    "CheckpointError",
    "read_qasm",
    "write_qasm",
    "run_options",
]
__version__ = "0.1.0"
