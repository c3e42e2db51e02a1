"""Circuit -> OpenQASM 2.0 text that :func:`~tnsim.circuits.qasm.read_qasm` reads back exactly."""

from __future__ import annotations

import math

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm.header import EXTENSION_DEFINITIONS, QELIB1_GATES
from tnsim.errors import InputError

__all__ = ["write_qasm"]


def _format_op(index: int, op: Operation) -> str:
    if op.custom is not None:
        raise InputError(
            f"operation {index} ('{op.name}' on qubits {op.qubits}) is a custom unitary; "
            "OpenQASM 2.0 cannot express an arbitrary matrix: replace it with named gates"
        )
    name = "U" if op.name == "u" else op.name
    if op.name not in QELIB1_GATES and op.name not in EXTENSION_DEFINITIONS:
        raise InputError(f"operation {index}: tnsim cannot write gate '{op.name}' as OpenQASM")
    params = ""
    if op.symbolic:
        raise InputError(
            f"operation {index} ('{op.name}' on qubits {op.qubits}) has a named angle; "
            "OpenQASM 2.0 has no named parameters: write circuit.bind({name: value, ...})"
        )
    values = [p for p in op.params if not isinstance(p, AngleExpr)]
    if values:
        if not all(math.isfinite(p) for p in values):
            raise InputError(f"operation {index} ('{op.name}') has a non-finite parameter")
        params = "(" + ", ".join(repr(float(p)) for p in values) + ")"
    return f"{name}{params} " + ", ".join(f"q[{q}]" for q in op.qubits) + ";"


def write_qasm(circuit: Circuit) -> str:
    """Return ``circuit`` as OpenQASM 2.0 text that :func:`read_qasm` reads back exactly.

    One register ``q`` holds every qubit; parameters are written with ``repr``
    so they round-trip bit for bit.  ``iswap``, ``ryy`` and ``fsim`` get a
    ``gate`` definition in terms of qelib1 gates
    (:data:`~tnsim.circuits.qasm.EXTENSION_DEFINITIONS`).

    Parameters
    ----------
    circuit : Circuit
        The circuit; every operation must be a named gate.

    Returns
    -------
    str
        The program text, ending with a newline.

    Raises
    ------
    InputError
        The circuit holds a custom unitary (OpenQASM 2.0 cannot express one).

    Examples
    --------
    >>> print(write_qasm(Circuit(2).h(0).cx(0, 1).rz(0.25, 1)), end="")
    OPENQASM 2.0;
    include "qelib1.inc";
    qreg q[2];
    h q[0];
    cx q[0], q[1];
    rz(0.25) q[1];
    """
    body = [_format_op(k, op) for k, op in enumerate(circuit.ops)]
    used = {op.name for op in circuit.ops}
    definitions = [text for name, text in EXTENSION_DEFINITIONS.items() if name in used]
    lines = ["OPENQASM 2.0;", 'include "qelib1.inc";', *definitions]
    lines.append(f"qreg q[{circuit.num_qubits}];")
    return "\n".join(lines + body) + "\n"
