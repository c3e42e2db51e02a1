"""Token-level parsing shared by every statement: expectations, gate lookup, call checks."""

from __future__ import annotations

from tnsim.circuits.qasm.arith import Code, parse_expression
from tnsim.circuits.qasm.cursor import TokenCursor
from tnsim.circuits.qasm.definitions import BUILTINS, Gate
from tnsim.circuits.qasm.header import EXTENSION_DEFINITIONS, QELIB1_GATES, RESERVED
from tnsim.circuits.qasm.lexer import Token, describe
from tnsim.circuits.qasm.program import Arg, Program

__all__ = ["TokenParser"]


class TokenParser(TokenCursor):
    """Reads the tokens of one file (or text) into ``program``; the helpers all parsers use."""

    program: Program

    def expect_int(self, what: str) -> tuple[int, Token]:
        """Consume a non-negative integer literal; return its value and token."""
        tok = self.tok
        if tok.kind != "int":
            raise self.error(f"expected {what} (a non-negative integer), found {describe(tok)}")
        self.advance()
        if len(tok.text) > 15:
            raise self.error(f"{what} {tok.text} is too large", tok)
        return int(tok.text), tok

    def new_name(self, tok: Token, kind: str) -> None:
        """Refuse a name already used by a register or gate."""
        if tok.text in RESERVED:
            raise self.error(f"'{tok.text}' is a reserved word and cannot name a {kind}", tok)

    def lookup(self, tok: Token) -> Gate:
        """The gate a name refers to, or an error naming the unknown gate."""
        gate = BUILTINS.get(tok.text) or self.program.gates.get(tok.text)
        if gate is not None:
            return gate
        if tok.text in QELIB1_GATES:
            hint = "it is defined in qelib1.inc: add 'include \"qelib1.inc\";' after the header"
        elif tok.text in EXTENSION_DEFINITIONS:
            hint = f"define it first, e.g. as {EXTENSION_DEFINITIONS[tok.text].split(' {')[0]}"
        elif tok.text.lower() in self.program.gates or tok.text.lower() in QELIB1_GATES:
            hint = f"names are case-sensitive: did you mean '{tok.text.lower()}'?"
        else:
            hint = f"define it with 'gate {tok.text} ... {{ ... }}' before using it"
        raise self.error(f"unknown gate '{tok.text}'; {hint}", tok)

    def param_list(self, env: dict[str, int] | None) -> list[Code]:
        """Parse a parenthesised parameter list into compiled expressions."""
        if not self.at("("):
            return []
        self.advance()
        codes: list[Code] = []
        if self.at(")"):
            self.advance()
            return codes
        codes.append(parse_expression(self, env))
        while self.at(","):
            self.advance()
            codes.append(parse_expression(self, env))
        self.expect(")", "to close the parameter list")
        return codes

    def check_counts(self, gate: Gate, tok: Token, n_params: int, n_qubits: int) -> None:
        """Refuse a call with the wrong number of parameters or qubits."""
        if n_params != gate.num_params:
            raise self.error(
                f"gate '{tok.text}' takes {gate.num_params} parameter(s), got {n_params}", tok
            )
        if n_qubits != gate.num_qubits:
            raise self.error(
                f"gate '{tok.text}' acts on {gate.num_qubits} qubit(s), got {n_qubits} argument(s)",
                tok,
            )

    def check_distinct(self, qubits, args, gate_name: str, label) -> None:
        """Refuse a call that names the same qubit twice."""
        if len(set(qubits)) == len(qubits):
            return
        for j, q in enumerate(qubits):
            if q in qubits[:j]:
                raise self.error(
                    f"{label(j)} appears twice in '{gate_name}'; a gate needs distinct qubits",
                    args[j].token if isinstance(args[j], Arg) else args[j],
                )
