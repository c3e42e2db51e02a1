"""OpenQASM 3 reader and writer (the subset circuit toolchains export).

The language is the one of Cross et al., "OpenQASM 3: A broader and deeper
quantum assembly language", ACM Transactions on Quantum Computing 3, 12 (2022).
tnsim reads the part of it that describes a unitary circuit followed by
measurements, with the safety rules of its OpenQASM 2.0 reader (no ``eval``,
sizes bounded before expansion, includes restricted).

What the reader accepts
-----------------------
* The header ``OPENQASM 3.0;`` (or ``3``), required: the version line is how
  :func:`tnsim.read_qasm` chooses the reader.  ``//`` and ``/* */`` comments.
* ``include "stdgates.inc";`` served from a built-in table (:data:`STDGATES`,
  see :mod:`tnsim.circuits.qasm3.library` for how each gate is read); any other
  include must be a plain file name of a file beside the circuit file (its real
  path, links resolved, must be there) holding gate definitions and constants.
  When reading text (a job document), only ``stdgates.inc``.
* ``qubit[n] q;``, ``qubit q;``, ``bit[n] c;``, ``bit c;`` and the old
  ``qreg q[n];``/``creg c[n];``; hardware qubits ``$0, $1, ...`` in programs that
  declare none.  Registers are numbered in declaration order.
* ``const`` and ``input`` declarations of ``int``, ``uint``, ``float`` and
  ``angle`` (optional widths), bound while reading: inputs from
  ``read_qasm(text, inputs={"theta": 0.3})`` (command line ``--input
  theta=0.3``); see :mod:`tnsim.circuits.qasm3.declarations` for the types.
  An input given no value is refused, unless read with ``unbound="keep"``: an
  ``input float[64]`` then becomes a named angle
  (:mod:`tnsim.circuits.parameters`), which may go through ``+ -``, unary
  ``-`` and ``* /`` by numbers, gate definitions, ``inv @``, ``pow(k) @`` and
  the ``ctrl @`` that give named gates; other uses are refused with their
  position (see :func:`read_qasm3`).
* Gate calls with parameters, broadcast over registers, ranges ``q[0:2]``
  (end included), sets ``q[{0, 3}]`` and negative indices; the built-in ``U``
  and ``gphase``; ``gate`` definitions (bodies of calls, ``gphase`` and
  ``barrier``); the modifiers ``ctrl @``, ``ctrl(n) @``, ``negctrl @``, ``inv @``
  and ``pow(k) @`` with integer ``k`` (see :mod:`tnsim.circuits.qasm3.modifiers`).
* ``for int i in [a:b] { ... }`` (also ``[a:s:b]``, sets ``{..}``, ``uint``), unrolled.
* ``barrier``; ``reset`` where it is the first operation on each of its qubits
  (the state is already ``|0>`` there); ``c[i] = measure q[j];``,
  ``c = measure q;``, ``measure q -> c;`` and ``measure q;``: each records which
  qubit a classical bit reads (:attr:`tnsim.Circuit.measurements`), and no gate
  may follow on a measured qubit.
* Expressions as described in :mod:`tnsim.circuits.qasm3.expr`.

Everything else is refused with ``file:line:column`` and the construct's name:
classical control flow (``if``, ``while``, ``switch``, ``break``...), mutable
classical variables and assignments, subroutines and ``extern``, timing
(``delay``, ``box``, durations), pulses (``cal``, ``defcal``), arrays,
aliases, annotations and pragmas, non-integer ``pow``.

A global phase (``gphase`` at the top level, or inside definitions) becomes one
custom one-qubit operation named ``gphase`` (``e^{iγ} I`` on qubit 0) at the end
of the circuit: amplitudes keep it; marginals and expectation values ignore it.

Writer
------
:func:`write_qasm3` writes ``qubit[n] q;``, one statement per operation, the
global phase as ``gphase(γ);`` and the measurements as ``c[i] = measure q[j];``,
with an exact definition (:data:`EXTENSION_DEFINITIONS3`) for each tnsim gate
that stdgates.inc lacks; :func:`read_qasm3` reads the text back operation for
operation.
"""

from __future__ import annotations

from tnsim.circuits.qasm3.extensions import EXTENSION_DEFINITIONS3
from tnsim.circuits.qasm3.library import MAX_GATE_DEPTH, STDGATE_NAMES, STDGATES
from tnsim.circuits.qasm3.modifiers import MAX_CUSTOM_QUBITS
from tnsim.circuits.qasm3.reader import DEFAULT_MAX_OPS, MAX_INCLUDE_DEPTH, read_qasm3

__all__ = [
    "DEFAULT_MAX_OPS",
    "EXTENSION_DEFINITIONS3",
    "MAX_CUSTOM_QUBITS",
    "MAX_GATE_DEPTH",
    "MAX_INCLUDE_DEPTH",
    "STDGATES",
    "STDGATE_NAMES",
    "read_qasm3",
]
