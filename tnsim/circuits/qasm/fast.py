"""Fast path for the commonest statement: ``name(params) r[i], s[j];`` on 1-3 qubits.

One regex matches a whole statement (after blanks and comments) straight from
the text.  Plain numbers are read without tokens; other parameter lists (no
parentheses inside) go to a callback that parses them with the general
expression parser.  Values are remembered by the text of the list (up to
4096 lists, then forgotten at once).  A statement it cannot settle for
certain (an erroneous parameter list, a whole-register argument, an unknown
gate or register, a repeated qubit, a measured qubit, the operation cap, an
arithmetic failure inside a definition) is left to the general parser, which
then reads it, or reports it, exactly as it always does.  So the fast path
changes speed only, never a result or a message.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from math import isfinite

from tnsim.circuits.circuit import Operation
from tnsim.circuits.qasm.arith import MathError
from tnsim.circuits.qasm.definitions import BUILTINS, expand
from tnsim.circuits.qasm.lexer import SKIP
from tnsim.circuits.qasm.program import Program

__all__ = ["read_simple_statements"]

_B = r"[ \t\r\f\v]*"
_ID = r"[A-Za-z_][A-Za-z0-9_]*"
_QARG = rf"({_ID}){_B}\[{_B}([0-9]{{1,15}}){_B}\]"
_STATEMENT_RE = re.compile(
    rf"{SKIP}({_ID})(?:{_B}\(([^()\n;]*)\){_B}|[ \t\r\f\v]+){_QARG}"
    rf"(?:{_B},{_B}{_QARG})?(?:{_B},{_B}{_QARG})?{_B};",
    re.ASCII,
)
_NUMBER_RE = re.compile(
    r"[+-]?(?:(?:[0-9]+\.[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[0-9]+(?:[eE][+-]?[0-9]+)?)",
    re.ASCII,
)
_ONE_NUMBER_RE = re.compile(rf"{_B}{_NUMBER_RE.pattern}{_B}", re.ASCII)
_BLANKS = " \t\r\f\v"


def _numbers(text: str) -> tuple[float, ...] | None:
    """The values of a parameter list of plain signed numbers, else ``None``."""
    if _ONE_NUMBER_RE.fullmatch(text) is not None:
        value = float(text)
        return (value,) if isfinite(value) else None
    if not text.strip(_BLANKS):
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


def _qubits(qregs: dict, groups: tuple) -> tuple[int, ...] | None:
    """Distinct qubit numbers of the ``reg[i]`` arguments in ``groups``, else ``None``."""
    qubits = []
    for k in (2, 4, 6):
        if groups[k] is None:
            break
        reg, index = qregs.get(groups[k]), int(groups[k + 1])
        if reg is None or index >= reg[1]:
            return None
        qubits.append(reg[0] + index)
    if len(qubits) > 1 and len(set(qubits)) < len(qubits):
        return None
    return tuple(qubits)


def _apply_defined(program: Program, gate, values: tuple, qubits: tuple[int, ...]) -> bool:
    """Append defined ``gate`` on ``qubits``, or return ``False`` leaving ``program`` unchanged."""
    template: list = []
    try:
        expand(gate, values, tuple(range(len(qubits))), template)
    except MathError:
        return False
    if program.first_measured(template, qubits) is not None:
        return False
    program.emit(template, qubits)
    return True


_CACHE_SIZE = 4096


def read_simple_statements(
    text: str, pos: int, program: Program, expressions: Callable, cache: dict
) -> int:
    """Apply the simple gate statements of ``text`` from ``pos`` on; return where they end.

    ``expressions(start, end)`` returns the values of the parameter list at
    ``text[start:end]``, or ``None`` if it has an error; ``cache`` remembers
    them by text.  Stops at the first statement it cannot settle (see the
    module notes) and returns that statement's offset (or one of the blanks
    before it).
    """
    match_at, builtin, defined = _STATEMENT_RE.match, BUILTINS.get, program.gates.get
    qregs, append = program.qregs, program.ops.append
    while (match := match_at(text, pos)) is not None:
        groups = match.groups()
        gate = builtin(groups[0]) or defined(groups[0])
        if gate is None or program.op_count + gate.size > program.max_ops:
            break
        values = () if groups[1] is None else cache.get(groups[1])
        if values is None:
            values = _numbers(groups[1])
            if values is None:
                values = expressions(match.start(2), match.end(2))
                if values is None:
                    break
            if len(cache) >= _CACHE_SIZE:
                cache.clear()
            cache[groups[1]] = values
        if len(values) != gate.num_params:
            break
        qubits = _qubits(qregs, groups)
        if qubits is None or len(qubits) != gate.num_qubits:
            break
        if gate.native is None:
            if not _apply_defined(program, gate, values, qubits):
                break
        elif program.measured or program.measured_regs:
            if any(program.was_measured(q) for q in qubits):
                break
            append(Operation(gate.native, qubits, values if gate.keep_params else ()))
        else:
            append(Operation(gate.native, qubits, values if gate.keep_params else ()))
        program.op_count += gate.size
        pos = match.end()
    return pos
