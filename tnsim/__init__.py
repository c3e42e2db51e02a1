"""tnsim: tensor-network contraction for wide, shallow quantum circuits."""

from . import plan  # callable: tnsim.plan(circuit, bits, ...) forecasts a contraction
from .circuit import Circuit, Operation
from .contract import contract
from .errors import (
    CheckpointError,
    InputError,
    PlanningError,
    QasmError,
    ResourceLimitError,
    TnsimError,
)
from .observables import Observable, PauliTerm, parse_observable
from .plan.optimizer import Planner
from .qasm import read_qasm, write_qasm
from .queries import amplitude, amplitudes, expectation, marginal, maxcut_energy
from .runconfig import run_options
from .sampling import sample
from .xeb import XebResult, xeb

__all__ = [
    "Circuit",
    "Operation",
    "amplitude",
    "amplitudes",
    "marginal",
    "expectation",
    "maxcut_energy",
    "sample",
    "xeb",
    "XebResult",
    "Observable",
    "PauliTerm",
    "parse_observable",
    "TnsimError",
    "InputError",
    "QasmError",
    "PlanningError",
    "ResourceLimitError",
    "CheckpointError",
    "read_qasm",
    "write_qasm",
    "run_options",
    "plan",
    "contract",
    "Planner",
]
__version__ = "0.1.0"
