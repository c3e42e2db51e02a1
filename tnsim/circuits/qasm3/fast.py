"""Fast path for the commonest OpenQASM 3 statement: ``name(params) r[i], s[j];``.

As in the 2.0 reader (:mod:`tnsim.circuits.qasm.fast`), one regex matches a whole
statement of the main program (after blanks and comments) straight from the text;
plain numbers are read without tokens and other parameter lists go to a callback
that parses them with the general expression parser (values remembered by their
text).  A statement it cannot settle for certain -- modifiers, hardware qubits,
ranges, an unknown gate or register, an index out of range, a repeated or measured
qubit, the operation cap, an arithmetic failure -- is left to the general parser,
which reads it, or reports it, exactly as it always does.  So the fast path
changes speed only, never a result or a message.
"""

from __future__ import annotations

import re
from collections.abc import Callable

from tnsim.circuits.circuit import Operation
from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm3.expr import INT_LIMIT, MathError
from tnsim.circuits.qasm3.lexer import SKIP
from tnsim.circuits.qasm3.library import BUILTINS, apply_modifiers, as_param
from tnsim.circuits.qasm3.modifiers import ModifierError
from tnsim.circuits.qasm3.program import Program

__all__ = ["read_simple_statements"]

_B = r"[ \t\r\f\v]*"
_ID = r"[A-Za-z_][A-Za-z0-9_]*"
_QARG = rf"({_ID}){_B}\[{_B}([0-9]{{1,15}}){_B}\]"
_STATEMENT_RE = re.compile(
    rf"{SKIP}({_ID})(?:{_B}\(([^()\n;]*)\){_B}|[ \t\r\f\v]+){_QARG}"
    rf"(?:{_B},{_B}{_QARG})?(?:{_B},{_B}{_QARG})?{_B};",
)
_NUMBER_RE = re.compile(
    r"[+-]?(?:(?:[0-9]+\.[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[0-9]+[eE][+-]?[0-9]+|([0-9]+))"
)
_BLANKS = " \t\r\f\v"
_CACHE_SIZE = 4096
_NO_PARAMS: tuple[tuple, tuple] = ((), ())


def _numbers(text: str) -> tuple | None:
    """Values of a parameter list of plain signed decimal numbers, else ``None``.

    Typed as the general parser types them: integer literals as ``int``.
    """
    if not text.strip(_BLANKS):
        return ()
    values: list[int | float] = []
    for piece in text.split(","):
        piece = piece.strip(_BLANKS)
        match = _NUMBER_RE.fullmatch(piece)
        if match is None:
            return None
        value: int | float
        if match.group(1) is not None:
            value = int(piece)
            if not -INT_LIMIT < value < INT_LIMIT or len(match.group(1)) > 70:
                return None
        else:
            value = float(piece)
            if value != value or value in (float("inf"), float("-inf")):
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
        if reg is None or index >= reg.size:
            return None
        qubits.append(reg.offset + index)
    if len(qubits) > 1 and len(set(qubits)) < len(qubits):
        return None
    return tuple(qubits)


def _apply_defined(program: Program, gate, values: tuple, qubits: tuple[int, ...]) -> bool:
    """Append defined ``gate`` on ``qubits``, or return ``False`` leaving ``program`` unchanged."""
    try:
        ops, phase = apply_modifiers(gate, (), values, qubits)
    except (MathError, ModifierError):
        return False
    if isinstance(phase, AngleExpr):  # refused by the general parser, with its position
        return False
    measured = program.measured
    if measured and any(q in measured for _, qs, _, _ in ops for q in qs):
        return False
    program.emit(ops, phase)
    return True


def read_simple_statements(
    text: str, pos: int, program: Program, expressions: Callable, cache: dict
) -> int:
    """Apply the simple gate statements of ``text`` from ``pos`` on; return where they end.

    ``expressions(start, end)`` returns the values of the parameter list at
    ``text[start:end]``, or ``None`` if it has an error; ``cache`` remembers them
    by text, with the parameters as operations hold them (:func:`as_param`).  Stops at the
    first statement it cannot settle and returns that
    statement's offset (or one of the blanks before it).
    """
    match_at, builtin, defined = _STATEMENT_RE.match, BUILTINS.get, program.gates.get
    qregs, append, touched = program.qregs, program.ops.append, program.touched
    while (match := match_at(text, pos)) is not None:
        groups = match.groups()
        gate = builtin(groups[0]) or defined(groups[0])
        if gate is None or program.op_count + gate.size > program.max_ops:
            break
        found = _NO_PARAMS if groups[1] is None else cache.get(groups[1])
        if found is None:
            values = _numbers(groups[1])
            if values is None:
                values = expressions(match.start(2), match.end(2))
                if values is None:
                    break
            if len(cache) >= _CACHE_SIZE:
                cache.clear()
            found = cache[groups[1]] = (values, tuple(map(as_param, values)))
        values, params = found
        if len(values) != gate.num_params:
            break
        qubits = _qubits(qregs, groups)
        if qubits is None or len(qubits) != gate.num_qubits:
            break
        if gate.native is None:
            if not _apply_defined(program, gate, values, qubits):
                break
        else:
            if program.measured and any(q in program.measured for q in qubits):
                break
            append(Operation(gate.native, qubits, params))
            touched.update(qubits)
        program.op_count += gate.size
        pos = match.end()
    return pos
