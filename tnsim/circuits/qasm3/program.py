"""What the statements of an OpenQASM 3 program (and its includes) build up."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm3.library import Gate

__all__ = ["GPHASE", "Program", "Register", "global_phase_matrix"]

GPHASE = "gphase"
"""Name of the custom one-qubit operation ``e^{iγ} I`` that carries a program's global phase."""


def global_phase_matrix(gamma: float) -> np.ndarray:
    """``e^{iγ}`` times the 2 x 2 identity (read-only).

    Examples
    --------
    >>> global_phase_matrix(math.pi / 2).round(12).tolist()
    [[1j, 0j], [0j, 1j]]
    """
    value = complex(math.cos(gamma), math.sin(gamma))
    m = np.array([[value, 0], [0, value]], dtype=complex)
    m.setflags(write=False)
    return m


@dataclass
class Register:
    """A qubit or bit register: first global index, size, and whether declared without a size."""

    offset: int
    size: int
    scalar: bool = False


@dataclass
class Program:
    """Registers, names, gates, operations and budgets of one program being read."""

    max_ops: int
    inputs: dict[str, float]
    gates: dict[str, Gate] = field(default_factory=dict)
    qregs: dict[str, Register] = field(default_factory=dict)
    cregs: dict[str, Register] = field(default_factory=dict)
    constants: dict[str, int | float | AngleExpr] = field(default_factory=dict)
    kinds: dict[str, str] = field(default_factory=dict)
    num_qubits: int = 0
    num_clbits: int = 0
    hardware: int = -1
    ops: list[Operation] = field(default_factory=list)
    op_count: int = 0
    iterations: int = 0
    phase: float = 0.0
    touched: set[int] = field(default_factory=set)
    measured: set[int] = field(default_factory=set)
    measurements: dict[int, int] = field(default_factory=dict)
    used_inputs: set[str] = field(default_factory=set)
    keep_unbound: bool = False
    unbound: list[str] = field(default_factory=list)
    include_stack: list[str] = field(default_factory=list)

    def qubit_name(self, qubit: int) -> str:
        """``reg[i]`` (or ``$i``) for a global qubit number, for messages."""
        if self.hardware >= 0:
            return f"${qubit}"
        for name, reg in self.qregs.items():
            if reg.offset <= qubit < reg.offset + reg.size:
                return name if reg.scalar else f"{name}[{qubit - reg.offset}]"
        return f"qubit {qubit}"

    def emit(self, ops: list, phase: float) -> None:
        """Append expanded operations ``(name, qubits, params, matrix)``; add ``phase``."""
        append, touched = self.ops.append, self.touched
        for name, qubits, params, matrix in ops:
            append(Operation(name, qubits, params if matrix is None else (), matrix))
            touched.update(qubits)
        self.phase += phase

    def circuit(self) -> Circuit:
        """The circuit read: operations, the global phase (if any) and the measurements."""
        n = self.hardware + 1 if self.hardware >= 0 else self.num_qubits
        circuit = Circuit(max(n, 1))
        circuit.ops.extend(self.ops)
        gamma = math.remainder(self.phase, 2 * math.pi)
        if gamma != 0.0:
            circuit.ops.append(Operation(GPHASE, (0,), (gamma,), global_phase_matrix(gamma)))
        for clbit in sorted(self.measurements):
            circuit.measure(self.measurements[clbit], clbit)
        return circuit
