"""Circuit -> OpenQASM 2.0 text that :func:`~tnsim.circuits.qasm.read_qasm` reads back exactly."""

from __future__ import annotations

import math
from collections.abc import Sequence

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm.header import (
    ADDED_DEFINITIONS,
    EXTENSION_DEFINITIONS,
    ORIGINAL_QELIB1,
    QELIB1_GATES,
)
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


LIBRARIES = ("extended", "original")
"""Gate libraries :func:`write_qasm` can write for."""

_DEPENDS = {"crx": ("cry",), "ryy": ("rzz",), "iswap": ("rxx", "rzz"), "fsim": ("rxx", "rzz", "cp")}
"""Definitions that call gates the original qelib1.inc lacks."""


def _definitions(used: set[str], library: str) -> list[str]:
    """The ``gate`` definitions a program using ``used`` needs, callees first."""
    table = dict(EXTENSION_DEFINITIONS)
    if library == "original":
        need = {name for name in used if name not in ORIGINAL_QELIB1 and name != "u"}  # u: U
        for name in list(need):
            need.update(_DEPENDS.get(name, ()))
        table = {**ADDED_DEFINITIONS, **EXTENSION_DEFINITIONS}
        return [text for name, text in table.items() if name in need]
    return [text for name, text in table.items() if name in used]


def _comments(lines: Sequence[str]) -> list[str]:
    out = []
    for line in lines:
        for part in str(line).splitlines() or [""]:
            out.append(("// " + part).rstrip())
    return out


def write_qasm(circuit: Circuit, *, library: str = "extended", comments: Sequence[str] = ()) -> str:
    """Return ``circuit`` as OpenQASM 2.0 text that :func:`read_qasm` reads back exactly.

    One register ``q`` holds every qubit; parameters are written with ``repr``
    so they round-trip bit for bit.  ``iswap``, ``ryy`` and ``fsim`` get a
    ``gate`` definition in terms of qelib1 gates
    (:data:`~tnsim.circuits.qasm.EXTENSION_DEFINITIONS`).  Recorded
    measurements (:meth:`Circuit.measure`) are written as ``measure``
    statements into one classical register ``c``.

    Parameters
    ----------
    circuit : Circuit
        The circuit; every operation must be a named gate.
    library : {"extended", "original"}
        ``"extended"`` (default) calls every qelib1.inc gate tnsim reads directly;
        ``"original"`` calls only the gates of the original qelib1.inc
        (:data:`~tnsim.circuits.qasm.header.ORIGINAL_QELIB1`) and writes a
        ``gate`` definition for each other gate used
        (:data:`~tnsim.circuits.qasm.header.ADDED_DEFINITIONS`), so strict readers
        accept the file; tnsim reads either back as the same circuit.
    comments : sequence of str
        Lines written as ``//`` comments after the ``OPENQASM 2.0;`` line
        (e.g. where the circuit came from).

    Returns
    -------
    str
        The program text, ending with a newline.

    Raises
    ------
    InputError
        The circuit holds a custom unitary (OpenQASM 2.0 cannot express one),
        or ``library`` is unknown.

    Examples
    --------
    >>> print(write_qasm(Circuit(2).h(0).cx(0, 1).rz(0.25, 1)), end="")
    OPENQASM 2.0;
    include "qelib1.inc";
    qreg q[2];
    h q[0];
    cx q[0], q[1];
    rz(0.25) q[1];
    >>> print(write_qasm(Circuit(1).p(0.5, 0), library="original"), end="")
    OPENQASM 2.0;
    include "qelib1.inc";
    gate p(lambda) a {
      u1(lambda) a;
    }
    qreg q[1];
    p(0.5) q[0];
    """
    if library not in LIBRARIES:
        raise InputError(f"library must be one of {', '.join(LIBRARIES)}, got {library!r}")
    body = [_format_op(k, op) for k, op in enumerate(circuit.ops)]
    used = {op.name for op in circuit.ops}
    lines = ["OPENQASM 2.0;", *_comments(comments), 'include "qelib1.inc";']
    lines += _definitions(used, library)
    lines.append(f"qreg q[{circuit.num_qubits}];")
    measured = getattr(circuit, "measurements", {})
    if measured:
        lines.append(f"creg c[{max(measured) + 1}];")
        body += [f"measure q[{q}] -> c[{c}];" for c, q in sorted(measured.items())]
    return "\n".join(lines + body) + "\n"
