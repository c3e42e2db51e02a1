"""OpenQASM 2.0 reader and writer; :func:`read_qasm` also reads OpenQASM 3.

:func:`read_qasm` and :func:`write_qasm` are the door for both versions
(:mod:`~tnsim.circuits.qasm.dispatch`): the header's version line chooses the
reader, and OpenQASM 3 is read by :mod:`tnsim.circuits.qasm3`.

The language is the one of Cross, Bishop, Smolin and Gambetta, "Open Quantum
Assembly Language", arXiv:1707.03429 (2017).  tnsim reads it with its own
lexer (:mod:`~tnsim.circuits.qasm.lexer`), a recursive-descent parser
(:mod:`~tnsim.circuits.qasm.reader`, with a regex fast path for simple gate statements
in :mod:`~tnsim.circuits.qasm.fast`) and a small arithmetic evaluator for gate
parameters (:mod:`~tnsim.circuits.qasm.arith`; no Python ``eval``).

What the reader accepts
-----------------------
* The header ``OPENQASM 2.0;`` (required), ``//`` comments, any number of
  ``qreg`` and ``creg`` declarations.  Qubit registers are numbered in
  declaration order: after ``qreg a[2]; qreg b[3];`` qubit ``b[0]`` is qubit 2.
* ``include "qelib1.inc";`` is served from a built-in gate table
  (:data:`QELIB1_GATES`); no file is read.  Each of its gates is read as the
  tnsim gate of the same name, whose matrix is documented in
  :mod:`tnsim.circuits.gates` (``u0`` is the identity).  The built-ins ``U`` and ``CX``
  are always available and become ``u`` and ``cx``.  Any other include must
  be a plain file name of a file beside the circuit file; its gate
  definitions are read with the same rules.
* ``gate`` definitions with parameters, expanded where they are used; calls
  to earlier definitions nest (at most :data:`MAX_GATE_DEPTH` levels).
* Register broadcasting: ``h q;`` applies ``h`` to every qubit of ``q``;
  ``cx a, b;`` pairs equal-size registers; single qubits repeat alongside.
* Parameter arithmetic: numbers, ``pi``, ``+ - * / ^`` (``^`` is a
  right-associative power, binding tighter than unary minus, so
  ``-2^2 == -4``), parentheses and ``sin cos tan exp ln sqrt``.
* ``barrier`` is checked and otherwise ignored.  ``measure`` records which
  qubit each classical bit reads (:attr:`Circuit.measurements`; classical
  bits numbered across the ``creg`` declarations in their order), which gives
  the classical-bit order of bitstrings; tnsim computes the state before
  measurement, so a gate on a qubit that was already measured is refused.
  ``reset``, ``if`` and ``opaque`` are refused: tnsim simulates unitary
  circuits only.  OpenQASM 2.0 has no block comments.

Every problem raises :class:`tnsim.errors.QasmError` with ``file:line:column``
(1-based) of the offending token.  Expansion is counted before it happens: a
program that would produce more than ``max_ops`` operations is refused at once.

tnsim extension
---------------
``iswap``, ``ryy`` and ``fsim`` are not in qelib1.inc.  :func:`write_qasm` emits
a ``gate`` definition for each one a circuit uses (:data:`EXTENSION_DEFINITIONS`),
an exact decomposition into qelib1 gates, so the file stays valid OpenQASM 2.0
for any reader.  When tnsim reads a definition whose tokens equal one of those
texts, it keeps the gate as the single native tnsim operation; any other
definition of those names is an ordinary user gate.
"""

from __future__ import annotations

from tnsim.circuits.qasm.arith import MAX_EXPR_DEPTH
from tnsim.circuits.qasm.definitions import MAX_GATE_DEPTH
from tnsim.circuits.qasm.dispatch import qasm_version, read_qasm, write_qasm
from tnsim.circuits.qasm.header import EXTENSION_DEFINITIONS, QELIB1_GATES
from tnsim.circuits.qasm.reader import DEFAULT_MAX_OPS, MAX_INCLUDE_DEPTH

__all__ = [
    "DEFAULT_MAX_OPS",
    "EXTENSION_DEFINITIONS",
    "MAX_EXPR_DEPTH",
    "MAX_GATE_DEPTH",
    "MAX_INCLUDE_DEPTH",
    "QELIB1_GATES",
    "qasm_version",
    "read_qasm",
    "write_qasm",
]
