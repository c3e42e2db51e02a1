"""Parsing the quantum statements of a program into nodes: calls, measure, reset, barrier, for."""

from __future__ import annotations

from tnsim.circuits.qasm.lexer import Token, describe
from tnsim.circuits.qasm3.declarations import DeclarationParser
from tnsim.circuits.qasm3.expr import is_constant
from tnsim.circuits.qasm3.nodes import (
    BarrierNode,
    CallNode,
    IndexSpec,
    LoopNode,
    MeasureNode,
    Operand,
    ResetNode,
)
from tnsim.circuits.qasm3.parser import REFUSED

__all__ = ["StatementParser"]

_LOOP_TYPES = ("int", "uint")


class StatementParser(DeclarationParser):
    """Adds the statements that act on qubits, as nodes a program runs."""

    def call(self, variables: dict):
        """Parse a gate call or ``gphase`` with its modifiers: ``ctrl @ rz(θ) a, b;``."""
        mods = self.modifiers(variables, in_body=False)
        head = self.advance()
        if head.kind != "id":
            raise self.error(f"expected a gate name, found {describe(head)}", head)
        gate = None if head.text == "gphase" else self.lookup(head)
        codes = self.param_list(variables)
        if self.at("["):
            raise self.refuse(self.tok, "gate durations (timing)")
        operands = [] if self.at(";") else self.operand_list(variables, quantum=True)
        self.expect(";", f"after the call of '{head.text}'")
        controls = sum(v for k, v, _ in mods if k in ("ctrl", "negctrl"))
        if gate is None:
            self.check_phase_call(head, len(codes), len(operands), controls)
        else:
            self.check_counts(gate, head, len(codes), len(operands) - controls)
        return CallNode(self.source, head, gate, tuple(mods), tuple(codes), tuple(operands))

    def operand_list(self, variables: dict, *, quantum: bool) -> list[Operand]:
        """Parse comma-separated qubit (or bit) operands."""
        operands = [self.operand(variables, quantum)]
        while self.at(","):
            self.advance()
            operands.append(self.operand(variables, quantum))
        return operands

    def operand(self, variables: dict, quantum: bool) -> Operand:
        """Parse ``q``, ``q[i]``, ``q[a:b]``, ``q[a:s:b]``, ``q[{i, j}]`` or a qubit ``$n``."""
        tok = self.tok
        if tok.kind == "hwq":
            if not quantum:
                raise self.error(f"{describe(tok)} is a qubit, not a bit")
            return self.hardware_operand()
        name = self.expect_id(f"a {'qubit' if quantum else 'bit'} register name")
        register = self.find_register(name, quantum)
        index = None
        if self.at("["):
            bracket = self.advance()
            index = self.index_spec(variables, bracket)
            self.expect("]", "after the index")
            if self.at("["):
                raise self.refuse(self.tok, "multi-dimensional indexing")
        return Operand(name, register, index)

    def hardware_operand(self) -> Operand:
        """A hardware qubit ``$n``: numbered directly, never mixed with declared qubits."""
        tok = self.advance()
        if self.program.qregs:
            raise self.error(
                f"hardware qubit {tok.text} in a program that declares qubits; use the declared "
                "qubits, or only hardware qubits",
                tok,
            )
        if len(tok.text) > 16:
            raise self.error(f"hardware qubit {tok.text[:20]}... is too large", tok)
        index = int(tok.text[1:])
        self.program.hardware = max(self.program.hardware, index)
        return Operand(tok, None, None, index)

    def index_spec(self, variables: dict, bracket: Token) -> IndexSpec:
        """Parse what is inside ``[...]``: an index, a range ``a:b``/``a:s:b`` or a set ``{..}``."""
        if self.at("{"):
            return IndexSpec("set", tuple(self.value_set(variables)), bracket)
        first = None if self.at(":") else self.expression(variables)
        if not self.at(":"):
            return IndexSpec("index", (first,), bracket)
        self.advance()
        second = None if self.at("]") or self.at(":") else self.expression(variables)
        if not self.at(":"):
            return IndexSpec("range", (first, None, second), bracket)
        self.advance()
        third = None if self.at("]") else self.expression(variables)
        return IndexSpec("range", (first, second, third), bracket)

    def value_set(self, variables: dict) -> list:
        """Parse ``{e1, e2, ...}`` into expression codes."""
        self.advance()
        codes = [self.expression(variables)]
        while self.at(","):
            self.advance()
            codes.append(self.expression(variables))
        self.expect("}", "to close the set")
        return codes

    def find_register(self, tok: Token, quantum: bool):
        """The register a name refers to."""
        mine = self.program.qregs if quantum else self.program.cregs
        if tok.text in mine:
            return mine[tok.text]
        other = self.program.cregs if quantum else self.program.qregs
        if tok.text in other:
            want = "qubit register" if quantum else "bit register"
            raise self.error(f"'{tok.text}' is not a {want} here", tok)
        if quantum and self.program.hardware >= 0:
            raise self.error(
                f"undeclared qubit '{tok.text}' in a program that uses hardware qubits ($n)", tok
            )
        decl = f"qubit[n] {tok.text};" if quantum else f"bit[n] {tok.text};"
        raise self.error(f"undeclared register '{tok.text}'; declare it with '{decl}' first", tok)

    def measure_arrow(self, variables: dict) -> MeasureNode:
        """Parse ``measure q -> c;`` or ``measure q;``."""
        tok = self.advance()
        qubits = self.operand(variables, True)
        bits = None
        if self.at("->"):
            self.advance()
            bits = self.operand(variables, False)
        elif not self.at(";"):
            raise self.error(
                f"expected '->' or ';' after the measured qubits, found {describe(self.tok)}"
            )
        self.expect(";", "after the measurement")
        return MeasureNode(self.source, tok, qubits, bits)

    def assignment(self, variables: dict) -> MeasureNode:
        """Parse ``c = measure q;`` or ``c[i] = measure q[j];`` (other assignments are refused)."""
        bits = self.operand(variables, False)
        if not self.at("="):
            if self.tok.kind == "sym" and self.tok.text.endswith("="):
                raise self.refuse(self.tok, "classical assignments")
            raise self.error(f"expected '=' after the bits, found {describe(self.tok)}")
        equals = self.advance()
        if not self.at("measure"):
            raise self.refuse(equals, "classical assignments (only '= measure ...' is read)")
        tok = self.advance()
        qubits = self.operand(variables, True)
        self.expect(";", "after the measurement")
        return MeasureNode(self.source, tok, qubits, bits)

    def reset(self, variables: dict) -> ResetNode:
        """Parse ``reset q;``."""
        tok = self.advance()
        qubits = self.operand(variables, True)
        self.expect(";", "after the reset")
        return ResetNode(self.source, tok, qubits)

    def barrier(self, variables: dict) -> BarrierNode:
        """Parse ``barrier;`` or ``barrier q, r[0];``."""
        tok = self.advance()
        operands = [] if self.at(";") else self.operand_list(variables, quantum=True)
        self.expect(";", "after the barrier")
        return BarrierNode(self.source, tok, tuple(operands))

    def loop(self, variables: dict) -> LoopNode:
        """Parse ``for int i in [a:b] { ... }`` (or ``[a:s:b]``, or a set ``{..}``)."""
        tok = self.advance()
        if self.tok.kind == "id" and self.tok.text in _LOOP_TYPES:
            self.scalar_type()
        elif self.tok.kind == "id" and self.tok.text in ("float", "angle", "bit", "bool"):
            raise self.refuse(self.tok, "loops over other than integers")
        name = self.expect_id("the loop variable's name")
        self.new_name(name, "loop variable")
        if name.text in variables:
            raise self.error(f"loop variable '{name.text}' is already in use", name)
        self.expect("in", f"after the loop variable '{name.text}'")
        if self.at("{"):
            kind, codes = "set", tuple(self.value_set(variables))
        elif self.at("["):
            kind, codes = "range", self.loop_range(variables)
        else:
            raise self.refuse(self.tok, "loops over other than a range [a:b] or a set {..}")
        inner = dict(variables)
        inner[name.text] = name.text
        body = self.loop_body(inner)
        count = None
        if all(c is None or is_constant(c) for c in codes):
            node = LoopNode(self.source, tok, name.text, kind, codes, (), None)
            count = len(node.values({}))
        return LoopNode(self.source, tok, name.text, kind, codes, tuple(body), count)

    def loop_range(self, variables: dict) -> tuple:
        """Parse ``[start:end]`` or ``[start:step:end]`` (the end is included)."""
        bracket = self.advance()
        start = self.expression(variables)
        self.expect(":", "in the loop range [start:end] or [start:step:end]")
        second = self.expression(variables)
        third = None
        if self.at(":"):
            self.advance()
            third = self.expression(variables)
        self.expect("]", "to close the loop range")
        del bracket
        return (start, None, second) if third is None else (start, second, third)

    def loop_body(self, variables: dict) -> list:
        """Parse a loop body: ``{ statements }`` or one statement."""
        if not self.at("{"):
            node = self.body_node(variables)
            return [] if node is None else [node]
        brace = self.advance()
        nodes = []
        while not self.at("}"):
            if self.tok.kind == "eof":
                raise self.error("the loop body opened here is never closed; add '}'", brace)
            node = self.body_node(variables)
            if node is not None:
                nodes.append(node)
        self.advance()
        return nodes

    def body_node(self, variables: dict):
        """Parse one statement inside a loop body into a node."""
        tok = self.tok
        word = tok.text if tok.kind == "id" else None
        if word in ("qubit", "qreg", "bit", "creg", "const", "input", "gate", "include"):
            raise self.error(
                f"'{word}' cannot appear inside a loop body; move it before the loop", tok
            )
        node = self.quantum_statement(variables)
        if node is None:
            raise self.error(f"expected a statement in the loop body, found {describe(tok)}")
        return node

    def quantum_statement(self, variables: dict):
        """Parse a statement that acts on qubits into a node (``None`` if it is not one)."""
        tok = self.tok
        if tok.kind == "sym" and tok.text in ("@", "#"):
            raise self.refuse(tok, "annotations and pragmas")
        if tok.kind != "id":
            return None
        word = tok.text
        if word in REFUSED:
            raise self.refuse(tok, REFUSED[word])
        if word == "for":
            return self.loop(variables)
        if word == "measure":
            return self.measure_arrow(variables)
        if word == "reset":
            return self.reset(variables)
        if word == "barrier":
            return self.barrier(variables)
        if word in self.program.cregs:
            return self.assignment(variables)
        if word in self.program.constants or word in variables:
            raise self.refuse(self.tok, "classical assignments")
        return self.call(variables)
