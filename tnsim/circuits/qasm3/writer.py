"""Circuit -> OpenQASM 3 text that :func:`~tnsim.circuits.qasm3.read_qasm3` reads back exactly."""

from __future__ import annotations

import cmath
import math
from collections.abc import Sequence

import numpy as np

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm3.extensions import EXTENSION_DEFINITIONS3, EXTENSION_NEEDS
from tnsim.circuits.qasm3.library import STDGATES, STDGATES_NATIVE
from tnsim.circuits.qasm3.parser import RESERVED
from tnsim.circuits.qasm3.program import GPHASE
from tnsim.errors import InputError

__all__ = ["write_qasm3"]

_STD = {gate.native for name, gate in STDGATES_NATIVE.items() if name == gate.native}


def _phase_of(index: int, matrix: np.ndarray, params: tuple) -> float:
    """γ of a custom ``gphase`` operation ``e^{iγ} I``, checked."""
    if matrix.shape != (2, 2) or not np.allclose(matrix, matrix[0, 0] * np.eye(2), atol=1e-12):
        raise InputError(f"operation {index} is named 'gphase' but is not a global phase e^(iγ) I")
    if len(params) == 1 and not isinstance(params[0], AngleExpr):
        return float(params[0])
    return cmath.phase(complex(matrix[0, 0]))


def _angle_text(index: int, op: Operation, value: float | AngleExpr) -> str:
    """A parameter as exact OpenQASM 3 text: ``repr`` of a number, or an affine expression.

    An expression is written offset first, then each term, the order in which
    :meth:`~tnsim.circuits.parameters.AngleExpr.value` adds them, so that reading
    the text back with the inputs gives the same bits as binding the circuit.
    """
    if not isinstance(value, AngleExpr):
        if not math.isfinite(value):
            raise InputError(f"operation {index} ('{op.name}') has a non-finite parameter")
        return repr(float(value))
    parts = [repr(value.offset)] if value.offset else []
    parts += [f"{coef!r} * {name}" for name, coef in value.terms]
    return " + ".join(parts)


def _format_op(index: int, op: Operation) -> str:
    if op.custom is not None:
        if op.name == GPHASE:
            return f"gphase({_phase_of(index, op.custom, op.params)!r});"
        raise InputError(
            f"operation {index} ('{op.name}' on qubits {op.qubits}) is a custom unitary; "
            "OpenQASM cannot express an arbitrary matrix: replace it with named gates"
        )
    if op.name != "u" and op.name not in _STD and op.name not in EXTENSION_DEFINITIONS3:
        raise InputError(f"operation {index}: tnsim cannot write gate '{op.name}' as OpenQASM 3")
    name = "U" if op.name == "u" else op.name
    params = ""
    if op.params:
        params = "(" + ", ".join(_angle_text(index, op, p) for p in op.params) + ")"
    return f"{name}{params} " + ", ".join(f"q[{q}]" for q in op.qubits) + ";"


def _inputs(circuit: Circuit) -> list[str]:
    """``input float[64] name;`` for each named angle of the circuit, checked."""
    taken = set(RESERVED) | set(STDGATES) | set(EXTENSION_DEFINITIONS3) | {"q", "c"}
    names = circuit.parameters()
    clash = [n for n in names if n in taken]
    if clash:
        raise InputError(
            f"parameter name(s) {', '.join(clash)} cannot be OpenQASM 3 inputs here (reserved, "
            "a standard gate, or the register q or c); rename them"
        )
    return [f"input float[64] {name};" for name in names]


def _definitions(used: set[str]) -> list[str]:
    """The extension definitions the circuit needs, dependencies first."""
    wanted = set()
    for name in used & set(EXTENSION_DEFINITIONS3):
        wanted.add(name)
        wanted.update(EXTENSION_NEEDS.get(name, ()))
    return [text for name, text in EXTENSION_DEFINITIONS3.items() if name in wanted]


def write_qasm3(circuit: Circuit, *, comments: Sequence[str] = ()) -> str:
    """Return ``circuit`` as OpenQASM 3 text that :func:`read_qasm3` reads back exactly.

    One register ``q`` holds every qubit; parameters are written with ``repr`` so
    they round-trip bit for bit; named angles (:mod:`tnsim.circuits.parameters`)
    become ``input float[64]`` declarations and their affine expressions, so
    reading the text with ``inputs`` equals ``circuit.bind(inputs)``; a custom
    ``gphase`` operation (as the reader
    makes for a global phase) is written as ``gphase(γ);``; measurements become
    ``bit[m] c;`` and ``c[i] = measure q[j];`` at the end.  Gates that
    ``stdgates.inc`` lacks get an exact definition
    (:data:`~tnsim.circuits.qasm3.EXTENSION_DEFINITIONS3`).

    Parameters
    ----------
    circuit : Circuit
        The circuit; every operation must be a named gate (or ``gphase``).
    comments : sequence of str
        Lines written as ``//`` comments after the ``OPENQASM 3.0;`` line.

    Returns
    -------
    str
        The program text, ending with a newline.

    Raises
    ------
    InputError
        The circuit holds a custom unitary OpenQASM cannot express.

    Examples
    --------
    >>> print(write_qasm3(Circuit(2).h(0).cx(0, 1).rzz(0.5, 0, 1).measure(1, 0)), end="")
    OPENQASM 3.0;
    include "stdgates.inc";
    gate rzz(theta) a, b {
      cx a, b;
      rz(theta) b;
      cx a, b;
    }
    qubit[2] q;
    bit[1] c;
    h q[0];
    cx q[0], q[1];
    rzz(0.5) q[0], q[1];
    c[0] = measure q[1];
    """
    body = [_format_op(k, op) for k, op in enumerate(circuit.ops)]
    used = {op.name for op in circuit.ops if op.custom is None}
    notes = [f"// {line}" for text in comments for line in str(text).splitlines() or [""]]
    lines = ["OPENQASM 3.0;", *notes, 'include "stdgates.inc";']
    lines += [*_definitions(used), *_inputs(circuit)]
    lines.append(f"qubit[{circuit.num_qubits}] q;")
    measurements = circuit.measurements
    if measurements:
        lines.append(f"bit[{max(measurements) + 1}] c;")
    lines += body
    lines += [f"c[{c}] = measure q[{measurements[c]}];" for c in sorted(measurements)]
    return "\n".join(lines) + "\n"
