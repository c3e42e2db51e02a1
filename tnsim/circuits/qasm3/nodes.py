"""Quantum statements as nodes that run against a program, once or once per loop iteration.

A statement of the main program is parsed into a node and run at once; a
loop body is parsed once and its nodes run for every value of the loop
variable (``env`` maps loop variables to their values).  Registers are
resolved while parsing; indices, parameters and loop ranges are evaluated when
a node runs.  Every size is checked before anything is expanded: the
operations a statement may add (:func:`~tnsim.circuits.qasm3.library.call_size`
times its broadcast) and the iterations a loop may run count against the
program's ``max_ops``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm.lexer import Source, Token
from tnsim.circuits.qasm3.expr import (
    Code,
    MathError,
    evaluate,
    give_values,
    needs_number,
    to_qasm_error,
)
from tnsim.circuits.qasm3.library import SIZE_CAP, Gate, apply_modifiers, call_size
from tnsim.circuits.qasm3.modifiers import ModifierError
from tnsim.circuits.qasm3.program import Program, Register
from tnsim.errors import QasmError

__all__ = [
    "BarrierNode",
    "CallNode",
    "IndexSpec",
    "LoopNode",
    "MeasureNode",
    "Operand",
    "ResetNode",
]


def start(code: Code) -> int:
    """Offset of the first character of an expression (its leftmost step)."""
    return min(offset for _, _, offset in code)


def _note(env: dict) -> str:
    if not env:
        return ""
    return " (when " + ", ".join(f"{k} = {v}" for k, v in env.items()) + ")"


@dataclass(frozen=True)
class IndexSpec:
    """What follows a register name in brackets: one index, a range or a set.

    ``kind`` is ``"index"`` (``codes = (i,)``), ``"range"`` (``codes = (start, step,
    end)``, each possibly ``None``; the end is included) or ``"set"``.
    """

    kind: str
    codes: tuple
    token: Token


@dataclass(frozen=True)
class Operand:
    """A qubit or bit argument: a register (or hardware qubit) and an optional index spec."""

    token: Token
    register: Register | None
    index: IndexSpec | None = None
    hardware: int = -1

    def bound(self) -> int:
        """Most elements the operand can name (for size bounds)."""
        size = 1 if self.register is None else self.register.size
        if self.hardware >= 0 or self.index is None:
            return size
        if self.index.kind == "set":
            return len(self.index.codes)
        return 1 if self.index.kind == "index" else size


class Node:
    """Base of the statement nodes: where they are and how they fail."""

    source: Source
    token: Token

    def fail(self, message: str, tok: Token | None, env: dict) -> QasmError:
        """A located error, noting the loop variables' values."""
        tok = self.token if tok is None else tok
        return self.source.error(message + _note(env), tok.offset)

    def value(self, code: Code, env: dict):
        """The value of ``code`` in ``env``, or a located error."""
        try:
            return evaluate(code, env)
        except MathError as exc:
            raise to_qasm_error(exc, self.source, _note(env)) from None

    def integer(self, code: Code, env: dict, what: str) -> int:
        """The value of ``code`` as an integer."""
        value = self.value(code, env)
        if isinstance(value, AngleExpr):
            raise self.source.error(needs_number(what, value) + _note(env), start(code))
        if isinstance(value, float):
            if not value.is_integer():
                raise self.source.error(
                    f"{what} must be an integer, got {value!r}{_note(env)}", start(code)
                )
            value = int(value)
        return value

    def resolve(self, operand: Operand, env: dict, what: str) -> tuple[Sequence[int], bool]:
        """Global indices an operand names, and whether it broadcasts (a register or range).

        Whole registers and ranges come back as :class:`range` objects, so a huge
        register costs nothing until its elements are used.
        """
        reg, spec = operand.register, operand.index
        if reg is None:  # a hardware qubit
            return [operand.hardware], False
        if spec is None:
            return range(reg.offset, reg.offset + reg.size), not reg.scalar
        if spec.kind == "index":
            i = self.element(spec.codes[0], reg, operand, env, what)
            return [reg.offset + i], False
        if spec.kind == "set":
            out = [reg.offset + self.element(c, reg, operand, env, what) for c in spec.codes]
            return out, True
        span = self.span(spec, reg, operand, env)
        return range(reg.offset + span.start, reg.offset + span.stop, span.step), True

    def element(self, code: Code, reg: Register, operand: Operand, env: dict, what: str) -> int:
        """One index into ``reg`` (negative counts from the end), checked."""
        i = self.integer(code, env, "an index")
        j = i + reg.size if i < 0 else i
        if not 0 <= j < reg.size:
            raise self.source.error(
                f"index {i} is out of range for {what} register '{operand.token.text}' of size "
                f"{reg.size} (valid: 0..{reg.size - 1}, or -{reg.size}..-1 from the end)"
                + _note(env),
                start(code),
            )
        return j

    def span(self, spec: IndexSpec, reg: Register, operand: Operand, env: dict) -> range:
        """The indices of a range ``[start:step:end]`` (end included) inside ``reg``."""
        start_c, step_c, end_c = spec.codes
        step = 1 if step_c is None else self.integer(step_c, env, "a range step")
        if step == 0:
            raise self.fail("a range step cannot be 0", spec.token, env)
        start = (0 if step > 0 else reg.size - 1) if start_c is None else None
        end = (reg.size - 1 if step > 0 else 0) if end_c is None else None
        if start is None:
            start = self.element(start_c, reg, operand, env, "the")
        if end is None:
            end = self.element(end_c, reg, operand, env, "the")
        out = range(start, end + (1 if step > 0 else -1), step)
        if not out:
            raise self.fail(f"the range selects no element of '{operand.token.text}'", None, env)
        return out


@dataclass
class CallNode(Node):
    """A gate call (or ``gphase``) with modifiers, broadcast over register arguments."""

    source: Source
    token: Token
    gate: Gate | None
    modifiers: tuple  # (kind, value or Code, token), outermost first
    params: tuple[Code, ...]
    operands: tuple[Operand, ...]

    def bound(self) -> int:
        """Upper bound on the operations one run adds."""
        mods = [(k, v if isinstance(v, int) else 1) for k, v, _ in self.modifiers]
        size = call_size(self.gate, mods)
        count = max([o.bound() for o in self.operands] or [1])
        return min(size * count, SIZE_CAP)

    def run(self, program: Program, env: dict) -> None:
        """Append the statement's operations to ``program``."""
        mods = []
        for kind, value, tok in self.modifiers:
            if kind == "pow" and not isinstance(value, int):
                value = self.power(value, tok, env)
            mods.append((kind, value))
        values = tuple(self.value(code, env) for code in self.params)
        args = [self.resolve(o, env, "qubit") for o in self.operands]
        count = self.broadcast(args, env)
        size = call_size(self.gate, mods)
        reserve(program, self, min(size * count, SIZE_CAP), env)
        if self.gate is None and not args:
            template, phase = apply_modifiers(None, mods, values, ())
            program.phase += self.numeric_phase(phase, env)
            return
        template, phase = self.expand(mods, values, len(args), env)
        phase = self.numeric_phase(phase, env)
        for i in range(count if template or phase else min(count, 1)):
            qubits = tuple(idx[i] if many else idx[0] for idx, many in args)
            self.check_distinct(qubits, program, env)
            ops = [(n, tuple(qubits[j] for j in qs), p, m) for n, qs, p, m in template]
            self.check_measured(ops, program, env)
            program.emit(ops, phase)

    def numeric_phase(self, phase, env: dict) -> float:
        """The global phase the call adds, refused when it depends on an unbound input."""
        if not isinstance(phase, AngleExpr):
            return phase
        raise self.fail(
            f"the call adds the global phase {phase}, which depends on the unbound input(s) "
            f"{', '.join(phase.names)} (a gphase, here or in a gate's definition): tnsim keeps "
            f"a circuit's global phase as a number only; {give_values(list(phase.names))}, or "
            "control the gphase (ctrl @ gphase(a) q is the phase gate p(a) on q)",
            None,
            env,
        )

    def power(self, code: Code, tok: Token, env: dict) -> int:
        """The integer exponent of a ``pow(k) @`` modifier."""
        value = self.value(code, env)
        if isinstance(value, AngleExpr):
            raise self.fail(needs_number("the exponent of pow(k) @", value), tok, env)
        if isinstance(value, float):
            if not value.is_integer():
                raise self.fail(
                    f"pow({value!r}) @ is a non-integer power; tnsim reads integer powers only "
                    "(write the gate's own fractional form, e.g. 'sx' for pow(0.5) @ x)",
                    tok,
                    env,
                )
            value = int(value)
        return value

    def broadcast(self, args: list, env: dict) -> int:
        """Length shared by the register arguments of the statement."""
        size = None
        for (indices, many), operand in zip(args, self.operands):
            if many:
                if size is not None and len(indices) != size:
                    raise self.fail(
                        f"register sizes differ ({size} and {len(indices)}) in one statement; "
                        "use registers of equal size or index single qubits",
                        operand.token,
                        env,
                    )
                size = len(indices)
        return 1 if size is None else size

    def expand(self, mods, values, arity: int, env: dict):
        """The operations on formal qubits ``0 .. arity-1``, and the phase."""
        try:
            return apply_modifiers(self.gate, mods, values, tuple(range(arity)))
        except MathError as exc:
            line, column = self.source.where(self.token.offset)
            note = f" (in gate '{self.token.text}' called at {self.source.name}:{line}:{column})"
            source = getattr(exc, "source", None) or self.source
            raise to_qasm_error(exc, source, note + _note(env)) from None
        except ModifierError as exc:
            raise self.fail(str(exc), None, env) from None

    def check_distinct(self, qubits: tuple, program: Program, env: dict) -> None:
        """Refuse a call that names one qubit twice."""
        if len(set(qubits)) == len(qubits):
            return
        for j, q in enumerate(qubits):
            if q in qubits[:j]:
                raise self.fail(
                    f"qubit {program.qubit_name(q)} appears twice in '{self.token.text}'; a gate "
                    "needs distinct qubits",
                    self.operands[j].token,
                    env,
                )

    def check_measured(self, ops: list, program: Program, env: dict) -> None:
        """Refuse a gate on a qubit after its measurement."""
        if not program.measured:
            return
        for _, qubits, _, _ in ops:
            for q in qubits:
                if q in program.measured:
                    raise self.fail(
                        f"gate '{self.token.text}' acts on {program.qubit_name(q)} after it was "
                        "measured; tnsim simulates unitary circuits only: move measurements to "
                        "the end",
                        None,
                        env,
                    )


def reserve(program: Program, node: Node, count: int, env: dict) -> None:
    """Refuse a program that would exceed its cap on operations."""
    total = program.op_count + count
    if total > program.max_ops:
        raise node.fail(
            f"the program expands to more than max_ops={program.max_ops} operations (this "
            f"statement adds up to {count}); raise max_ops if you mean it",
            None,
            env,
        )
    program.op_count = total


@dataclass
class MeasureNode(Node):
    """``measure q -> c;``, ``c = measure q;`` or ``measure q;``: the classical-bit order."""

    source: Source
    token: Token
    qubits: Operand
    bits: Operand | None

    def bound(self) -> int:
        """Measurements add no operation."""
        return 0

    def run(self, program: Program, env: dict) -> None:
        """Record which qubit each classical bit reads; no gate may follow on those qubits."""
        qs, q_many = self.resolve(self.qubits, env, "qubit")
        reserve(program, self, len(qs), env)
        if self.bits is not None:
            cs, c_many = self.resolve(self.bits, env, "bit")
            if q_many != c_many or len(qs) != len(cs):
                raise self.fail(
                    "measure needs a qubit register and a bit register of equal size, or a "
                    f"single qubit and a single bit; got {len(qs)} qubit(s) and {len(cs)} bit(s)",
                    self.qubits.token,
                    env,
                )
            for q, c in zip(qs, cs):
                program.measurements[c] = q
        program.measured.update(qs)


@dataclass
class ResetNode(Node):
    """``reset q;``: read only where it is the first operation on each qubit (a no-op then)."""

    source: Source
    token: Token
    qubits: Operand

    def bound(self) -> int:
        """A reset of a fresh qubit adds no operation."""
        return 0

    def run(self, program: Program, env: dict) -> None:
        """Check that no operation or measurement came before on the qubits."""
        qs, _ = self.resolve(self.qubits, env, "qubit")
        used = program.touched | program.measured
        for q in qs if len(qs) <= len(used) else sorted(used):
            if q in qs and q in used:
                raise self.fail(
                    f"reset of {program.qubit_name(q)} after it was used: tnsim simulates "
                    "unitary circuits and reads 'reset' only as the first operation on a qubit",
                    None,
                    env,
                )


@dataclass
class BarrierNode(Node):
    """``barrier q, r;`` (or ``barrier;``): checked, changes nothing."""

    source: Source
    token: Token
    operands: tuple[Operand, ...]

    def bound(self) -> int:
        """Barriers add no operation."""
        return 0

    def run(self, program: Program, env: dict) -> None:
        """Check that the operands name valid qubits."""
        for operand in self.operands:
            self.resolve(operand, env, "qubit")


@dataclass
class LoopNode(Node):
    """``for int i in [a:s:b] body`` or ``for int i in {..} body``, unrolled."""

    source: Source
    token: Token
    variable: str
    kind: str  # "range" or "set"
    codes: tuple
    body: tuple
    count: int | None  # iterations, when the range is known while parsing

    def bound(self) -> int:
        """Upper bound on the operations the whole loop adds (0 if not known yet)."""
        if self.count is None:
            return 0
        return min(self.count * sum(node.bound() for node in self.body), SIZE_CAP)

    def values(self, env: dict) -> range | list[int]:
        """The values the loop variable takes."""
        if self.kind == "set":
            return [self.integer(c, env, "a loop value") for c in self.codes]
        start, step, end = self.codes
        a = self.integer(start, env, "a loop bound")
        s = 1 if step is None else self.integer(step, env, "a loop step")
        b = self.integer(end, env, "a loop bound")
        if s == 0:
            raise self.fail("a loop range step cannot be 0", None, env)
        return range(a, b + (1 if s > 0 else -1), s)

    def run(self, program: Program, env: dict) -> None:
        """Run the body once per value of the loop variable."""
        values = self.values(env)
        try:
            count = len(values)
        except OverflowError:  # a range of more than 2**63 values
            count = SIZE_CAP
        program.iterations += count
        if program.iterations > max(program.max_ops, 1):
            raise self.fail(
                f"loops run more than max_ops={program.max_ops} iterations in all (this loop "
                f"runs {count}); raise max_ops if you mean it",
                None,
                env,
            )
        body_bound = sum(node.bound() for node in self.body)
        if program.op_count + min(count * body_bound, SIZE_CAP) > program.max_ops:
            raise self.fail(
                f"the loop expands to more than max_ops={program.max_ops} operations ({count} "
                f"iterations of up to {body_bound}); raise max_ops if you mean it",
                None,
                env,
            )
        inner = dict(env)
        for v in values:
            inner[self.variable] = v
            for node in self.body:
                node.run(program, inner)
