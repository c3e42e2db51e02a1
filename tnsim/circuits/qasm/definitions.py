"""Gates a program can call, and their expansion into tnsim operations.

A gate is native (one tnsim operation) or a definition: a body of calls to
earlier gates with parameter code.  Each definition records how many native
operations it expands to (``size``, capped) and how deeply it nests
(``depth``), so a program's size is known before anything is expanded.
"""

from __future__ import annotations

from dataclasses import dataclass

from tnsim.circuits.gates import GATES
from tnsim.circuits.qasm.arith import Code, evaluate
from tnsim.circuits.qasm.header import (
    ADDED_DEFINITIONS,
    BUILTIN_GATES,
    EXTENSION_DEFINITIONS,
    QELIB1_GATES,
)
from tnsim.circuits.qasm.lexer import canonical

__all__ = [
    "ADDED_TOKENS",
    "BUILTINS",
    "EXTENSION_TOKENS",
    "MAX_GATE_DEPTH",
    "QELIB1",
    "SIZE_CAP",
    "Call",
    "Gate",
    "expand",
]

MAX_GATE_DEPTH = 100
"""Deepest allowed nesting of gate definitions calling one another."""

SIZE_CAP = 1 << 62
"""Definition sizes saturate here (a program that large is refused anyway)."""


@dataclass(frozen=True)
class Call:
    """One gate call inside a definition: callee, parameter code, formal qubit indices."""

    gate: Gate
    params: tuple[Code, ...]
    args: tuple[int, ...]


@dataclass(frozen=True)
class Gate:
    """A gate the program can call: native (one tnsim operation) or a definition."""

    name: str
    num_params: int
    num_qubits: int
    origin: str
    native: str | None = None
    keep_params: bool = True
    body: tuple[Call, ...] = ()
    size: int = 1
    depth: int = 0


def _native(qasm_name: str, tnsim_name: str, origin: str) -> Gate:
    spec = GATES[tnsim_name]
    if qasm_name == "u0":
        return Gate("u0", 1, 1, origin, "id", keep_params=False)
    return Gate(qasm_name, spec.num_params, spec.num_qubits, origin, tnsim_name)


BUILTINS = {q: _native(q, t, "the OpenQASM 2.0 language") for q, t in BUILTIN_GATES.items()}
QELIB1 = {q: _native(q, t, "qelib1.inc") for q, t in QELIB1_GATES.items()}
EXTENSION_TOKENS = {name: canonical(text) for name, text in EXTENSION_DEFINITIONS.items()}
"""The tokens of each extension definition, to recognise it when read back."""
ADDED_TOKENS = {name: canonical(text) for name, text in ADDED_DEFINITIONS.items()}
"""The tokens of each definition of a gate the original qelib1.inc lacks (written by
``write_qasm(..., library="original")``): read back as the qelib1.inc gate itself."""


def expand(gate: Gate, params: tuple[float, ...], qubits: tuple[int, ...], out: list) -> None:
    """Append ``(tnsim name, qubits, params)`` of ``gate`` applied to ``qubits`` to ``out``.

    Raises :class:`~tnsim.circuits.qasm.arith.MathError` when a parameter has no finite value.

    Examples
    --------
    >>> out = []
    >>> expand(QELIB1["u0"], (0.5,), (3,), out)
    >>> out
    [('id', (3,), ())]
    """
    if gate.native is not None:
        out.append((gate.native, qubits, params if gate.keep_params else ()))
        return
    for call in gate.body:
        values = tuple(evaluate(code, params) for code in call.params)
        expand(call.gate, values, tuple(qubits[i] for i in call.args), out)
