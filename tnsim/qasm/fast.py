"""Fast path for the commonest statement: ``name(numbers) r[i], s[j];`` on 1-3 qubits.

One regex matches a whole statement (after blanks and comments) straight from
the text, without tokens.  A statement it cannot settle for certain (an
expression other than a plain number, a whole-register argument, an unknown
gate or register, a repeated qubit, a measured qubit, the operation cap, an
arithmetic failure inside a definition) is left to the general parser, which
then reads it, or reports it, exactly as it always does.  So the fast path
changes speed only, never a result or a message.
"""

from __future__ import annotations

import re
from math import isfinite

from ..circuit import Operation
from .arith import MathError
from .definitions import BUILTINS, expand
from .program import Program

__all__ = ["read_simple_statements"]

_B = r"[ \t\r\f\v]*"
_ID = r"[A-Za-z_][A-Za-z0-9_]*"
_QARG = rf"({_ID}){_B}\[{_B}([0-9]{{1,15}}){_B}\]"
_STATEMENT_RE = re.compile(
    rf"(?:\s|//[^\n]*)*({_ID})(?:{_B}\(([^()\n;]*)\){_B}|[ \t\r\f\v]+){_QARG}"
    rf"(?:{_B},{_B}{_QARG})?(?:{_B},{_B}{_QARG})?{_B};",
    re.ASCII,
)
_NUMBER_RE = re.compile(
    r"[+-]?(?:(?:[0-9]+\.[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[0-9]+(?:[eE][+-]?[0-9]+)?)",
    re.ASCII,
)
_BLANKS = " \t\r\f\v"


def _numbers(text: str | None) -> tuple[float, ...] | None:
    """The values of a parameter list of plain signed numbers, else ``None``."""
    if text is None or not text.strip(_BLANKS):
        return ()
    values = []
    for piece in text.split(","):
        piece = piece.strip(_BLANKS)
        if _NUMBER_RE.fullmatch(piece) is None:
            return None
        value = float(piece)
        if not isfinite(value):
            return None
        values.append(value)
    return tuple(values)


def _qubits(program: Program, groups: tuple) -> tuple[int, ...] | None:
    """Distinct qubit numbers of the ``reg[i]`` arguments in ``groups``, else ``None``."""
    qubits = []
    qregs = program.qregs
    for k in range(2, 8, 2):
        name = groups[k]
        if name is None:
            break
        reg = qregs.get(name)
        index = int(groups[k + 1])
        if reg is None or index >= reg[1]:
            return None
        qubits.append(reg[0] + index)
    if len(qubits) > 1 and len(set(qubits)) < len(qubits):
        return None
    return tuple(qubits)


def _apply(program: Program, gate, values: tuple[float, ...], qubits: tuple[int, ...]) -> bool:
    """Append ``gate`` on ``qubits``, or return ``False`` leaving ``program`` unchanged."""
    if program.op_count + gate.size > program.max_ops:
        return False
    if gate.native is not None:
        template = [(gate.native, range(len(qubits)), values if gate.keep_params else ())]
    else:
        template = []
        try:
            expand(gate, values, tuple(range(len(qubits))), template)
        except MathError:
            return False
    if program.first_measured(template, qubits) is not None:
        return False
    if gate.native is not None:
        program.ops.append(Operation(gate.native, qubits, template[0][2]))
    else:
        program.emit(template, qubits)
    program.op_count += gate.size
    return True


def read_simple_statements(text: str, pos: int, program: Program) -> int:
    """Apply the simple gate statements of ``text`` from ``pos`` on; return where they end.

    Stops at the first statement it cannot settle (see the module notes) and
    returns that statement's offset (or one of the blanks before it).
    """
    match_at, gates = _STATEMENT_RE.match, program.gates
    while (match := match_at(text, pos)) is not None:
        groups = match.groups()
        gate = BUILTINS.get(groups[0]) or gates.get(groups[0])
        if gate is None:
            break
        values = _numbers(groups[1])
        if values is None or len(values) != gate.num_params:
            break
        qubits = _qubits(program, groups)
        if qubits is None or len(qubits) != gate.num_qubits:
            break
        if not _apply(program, gate, values, qubits):
            break
        pos = match.end()
    return pos
