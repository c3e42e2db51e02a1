"""What the statements of a program (and its includes) build up."""

from __future__ import annotations

from typing import NamedTuple

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.qasm.definitions import Gate
from tnsim.circuits.qasm.lexer import Token

__all__ = ["Arg", "Program"]


class Arg(NamedTuple):
    """A quantum or classical argument: the indices it names, whether a whole register."""

    indices: range
    register: bool
    token: Token


class Program:
    """Registers, gates, operations and the operation budget of one program."""

    def __init__(self, max_ops: int):
        self.max_ops = max_ops
        self.gates: dict[str, Gate] = {}
        self.qregs: dict[str, tuple[int, int]] = {}  # name -> (offset, size)
        self.cregs: dict[str, int] = {}
        self.clbit_offsets: dict[str, int] = {}  # creg name -> its first global classical bit
        self.num_clbits = 0
        self.measurements: dict[int, int] = {}  # global classical bit -> qubit read into it
        self.num_qubits = 0
        self.ops: list[Operation] = []
        self.op_count = 0
        self.measured: set[int] = set()
        self.measured_regs: set[str] = set()
        self.include_stack: list[str] = []

    def qubit_name(self, qubit: int) -> str:
        """``reg[i]`` for a qubit number."""
        for name, (offset, size) in self.qregs.items():
            if offset <= qubit < offset + size:
                return f"{name}[{qubit - offset}]"
        return f"qubit {qubit}"

    def was_measured(self, qubit: int) -> bool:
        """Whether a ``measure`` statement has read ``qubit``."""
        if qubit in self.measured:
            return True
        return any(
            self.qregs[name][0] <= qubit < sum(self.qregs[name]) for name in self.measured_regs
        )

    def first_measured(self, template: list, qubits: tuple[int, ...]) -> int | None:
        """A qubit that ``template`` on ``qubits`` would touch after its measurement."""
        if self.measured or self.measured_regs:
            for _, formal, _ in template:
                for i in formal:
                    if self.was_measured(qubits[i]):
                        return qubits[i]
        return None

    def emit(self, template: list, qubits: tuple[int, ...]) -> None:
        """Append ``template`` (``(name, formal qubits, params)`` triples) on ``qubits``."""
        append = self.ops.append
        for name, formal, params in template:
            append(Operation(name, tuple([qubits[i] for i in formal]), params))

    def circuit(self) -> Circuit:
        """The circuit read (every operation was validated while parsing)."""
        circuit = Circuit(self.num_qubits)
        circuit.ops.extend(self.ops)
        for clbit, qubit in self.measurements.items():
            circuit.measure(qubit, clbit)
        return circuit
