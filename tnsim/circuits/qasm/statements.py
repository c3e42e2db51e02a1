"""Parsing the statements of a main program: declarations, gate calls, barrier, measure."""

from __future__ import annotations

from tnsim.circuits.circuit import MAX_QUBITS
from tnsim.circuits.qasm.arith import MathError, constant
from tnsim.circuits.qasm.definitions import expand
from tnsim.circuits.qasm.gatedef import DefinitionParser
from tnsim.circuits.qasm.lexer import Token
from tnsim.circuits.qasm.program import Arg

__all__ = ["StatementParser"]


class StatementParser(DefinitionParser):
    """Adds ``qreg``/``creg``, gate calls with broadcasting, ``barrier`` and ``measure``."""

    def register(self, kind: str) -> None:
        """Parse a ``qreg`` or ``creg`` declaration."""
        self.advance()
        name = self.expect_id(f"a {kind} name")
        self.new_name(name, "register")
        if name.text in self.program.qregs or name.text in self.program.cregs:
            raise self.error(
                f"register '{name.text}' is already declared; choose another name", name
            )
        self.expect("[", f"after the register name '{name.text}'")
        size, size_tok = self.expect_int("the register size")
        if size < 1:
            raise self.error(f"register '{name.text}' needs at least one element", size_tok)
        if kind == "qreg" and self.program.num_qubits + size > MAX_QUBITS:
            raise self.error(
                f"register '{name.text}' of {size:,} qubits makes "
                f"{self.program.num_qubits + size:,} qubits in all; tnsim handles at most "
                f"{MAX_QUBITS:,} (every qubit needs a tensor)",
                size_tok,
            )
        self.expect("]", "after the register size")
        self.expect(";", f"after the declaration of '{name.text}'")
        if kind == "qreg":
            self.program.qregs[name.text] = (self.program.num_qubits, size)
            self.program.num_qubits += size
        else:
            self.program.cregs[name.text] = size
            self.program.clbit_offsets[name.text] = self.program.num_clbits
            self.program.num_clbits += size

    def application(self) -> None:
        """Parse one gate application and append its expansion to the program."""
        tok = self.advance()
        gate = self.lookup(tok)
        codes = self.param_list(None)
        args = self.arg_list(quantum=True)
        self.expect(";", f"after the call of '{tok.text}'")
        self.check_counts(gate, tok, len(codes), len(args))
        values = tuple(constant(code) for code in codes)
        count = self.broadcast_size(args)
        self.reserve(gate.size * count, tok)
        template: list = []
        try:
            expand(gate, values, tuple(range(gate.num_qubits)), template)
        except MathError as exc:
            line, column = self.source.where(tok.offset)
            note = f" (in gate '{tok.text}' called at {self.source.name}:{line}:{column})"
            raise exc.to_qasm_error(note) from None
        # An empty body emits nothing: check one instance instead of looping over a huge register.
        for i in range(count if template else min(count, 1)):
            qubits = tuple(a.indices[i] if a.register else a.indices[0] for a in args)
            self.check_distinct(qubits, args, tok.text, lambda j, q=qubits: self.qname(q[j]))
            measured = self.program.first_measured(template, qubits)
            if measured is not None:
                raise self.error(
                    f"gate '{tok.text}' acts on {self.qname(measured)} after it was measured; "
                    "tnsim simulates unitary circuits only: move measurements to the end",
                    tok,
                )
            self.program.emit(template, qubits)

    def qname(self, qubit: int) -> str:
        """The register-and-index name of a global qubit number, for messages."""
        return f"qubit {self.program.qubit_name(qubit)}"

    def reserve(self, count: int, tok: Token) -> None:
        """Refuse a program that would exceed the cap on operations."""
        total = self.program.op_count + count
        if total > self.program.max_ops:
            raise self.error(
                f"the program expands to more than max_ops={self.program.max_ops} operations "
                f"(this statement adds {count}); raise max_ops if you mean it",
                tok,
            )
        self.program.op_count = total

    def broadcast_size(self, args: list[Arg]) -> int:
        """Length shared by the register arguments of a broadcast statement."""
        size = None
        for arg in args:
            if arg.register:
                if size is not None and len(arg.indices) != size:
                    raise self.error(
                        f"register sizes differ ({size} and {len(arg.indices)}) in one statement; "
                        "use registers of equal size or index single qubits",
                        arg.token,
                    )
                size = len(arg.indices)
        return 1 if size is None else size

    def arg_list(self, *, quantum: bool) -> list[Arg]:
        """Parse the comma-separated arguments of a statement."""
        args = [self.argument(quantum)]
        while self.at(","):
            self.advance()
            args.append(self.argument(quantum))
        return args

    def argument(self, quantum: bool) -> Arg:
        """Parse one argument: a whole register or one indexed bit."""
        kind = "qubit" if quantum else "classical"
        tok = self.expect_id(f"a {kind} register name")
        offset, size = self.find_register(tok, quantum)
        if not self.at("["):
            return Arg(range(offset, offset + size), True, tok)
        self.advance()
        index, index_tok = self.expect_int("an index")
        if index >= size:
            raise self.error(
                f"index {index} is out of range for register '{tok.text}' of size {size} "
                f"(valid: 0..{size - 1})",
                index_tok,
            )
        self.expect("]", "after the index")
        return Arg(range(offset + index, offset + index + 1), False, tok)

    def find_register(self, tok: Token, quantum: bool) -> tuple[int, int]:
        """The first global index and size of the named register."""
        mine = self.program.qregs if quantum else {n: (0, s) for n, s in self.program.cregs.items()}
        if tok.text in mine:
            return mine[tok.text]
        other = self.program.cregs if quantum else self.program.qregs
        if tok.text in other:
            want = "qubit register (qreg)" if quantum else "classical register (creg)"
            raise self.error(f"'{tok.text}' is not a {want} here", tok)
        decl = "qreg" if quantum else "creg"
        raise self.error(
            f"undeclared register '{tok.text}'; declare it with '{decl} {tok.text}[n];' first",
            tok,
        )

    def barrier(self) -> None:
        """Parse a ``barrier`` statement (it changes nothing)."""
        self.advance()
        self.arg_list(quantum=True)
        self.expect(";", "after the barrier")

    def measure(self) -> None:
        """Parse a ``measure`` statement and record which qubit each classical bit reads.

        Classical bits are numbered across the ``creg`` declarations in their
        order (after ``creg a[2]; creg b[3];`` bit ``b[0]`` is classical bit 2);
        a later measurement into the same bit replaces an earlier one.
        """
        self.advance()
        qarg = self.argument(quantum=True)
        self.expect("->", "between the measured qubits and the classical bits")
        carg = self.argument(quantum=False)
        self.expect(";", "after the measurement")
        if qarg.register != carg.register or len(qarg.indices) != len(carg.indices):
            raise self.error(
                f"measure needs a qubit register and a classical register of equal size, or a "
                f"single qubit and a single bit; got {len(qarg.indices)} qubit(s) and "
                f"{len(carg.indices)} bit(s)",
                qarg.token,
            )
        if qarg.register:
            self.program.measured_regs.add(qarg.token.text)
        else:
            self.program.measured.add(qarg.indices[0])
        # Classical bits are numbered across the cregs in declaration order.
        base = self.program.clbit_offsets[carg.token.text]
        for qubit, bit in zip(qarg.indices, carg.indices):
            self.program.measurements[base + bit] = qubit
