"""Parsing ``gate`` definitions into :class:`~tnsim.circuits.qasm.definitions.Gate` values."""

from __future__ import annotations

from typing import TYPE_CHECKING

from tnsim.circuits.qasm.definitions import (
    ADDED_TOKENS,
    EXTENSION_TOKENS,
    MAX_GATE_DEPTH,
    SIZE_CAP,
    Call,
    Gate,
)
from tnsim.circuits.qasm.header import KEYWORDS, UNITARY_ONLY
from tnsim.circuits.qasm.lexer import Token, describe
from tnsim.circuits.qasm.parser import TokenParser
from tnsim.errors import QasmError

__all__ = ["DefinitionParser"]


class DefinitionParser(TokenParser):
    """The token parser, with ``gate name(params) qubits { body }`` definitions.

    Extends :class:`~tnsim.circuits.qasm.parser.TokenParser`; the reader that
    uses it supplies :meth:`unsupported`.
    """

    if TYPE_CHECKING:

        def unsupported(self, tok: Token) -> QasmError:
            """The error for a statement tnsim does not simulate (``reset``, ``if`` ...)."""
            ...

    def gate_definition(self) -> None:
        """Parse one ``gate`` or ``opaque`` definition and record the gate."""
        self.recording = []
        self.advance()
        name = self.expect_id("a gate name")
        existing = self.check_gate_name(name)
        params = self.id_list("(", ")", "parameter") if self.at("(") else []
        qargs = self.id_list(None, "{", "qubit argument")
        self.check_formals(params, qargs)
        brace = self.tok
        self.expect("{", f"to open the body of gate '{name.text}'")
        body = self.gate_body(name, brace, params, qargs)
        tokens, self.recording = tuple(self.recording), None
        if existing is not None:
            if ADDED_TOKENS[name.text] != tokens:
                raise self.already_defined(name, existing)
            return  # tnsim's own definition of a qelib1.inc gate: keep the gate
        self.program.gates[name.text] = self.make_gate(name, len(params), len(qargs), body, tokens)

    def check_gate_name(self, name: Token) -> Gate | None:
        """Refuse a gate name that is reserved or already defined.

        A qelib1.inc gate that the original library lacks may be defined again
        with tnsim's exact text (:data:`~tnsim.circuits.qasm.header.ADDED_DEFINITIONS`);
        that gate is returned so the caller can compare the body.
        """
        self.new_name(name, "gate")
        existing = self.program.gates.get(name.text)
        if existing is None:
            return None
        if existing.origin == "qelib1.inc" and name.text in ADDED_TOKENS:
            return existing
        raise self.already_defined(name, existing)

    def already_defined(self, name: Token, existing: Gate) -> QasmError:
        """The error for a second definition of ``name``."""
        return self.error(
            f"gate '{name.text}' is already defined by {existing.origin}; choose another name",
            name,
        )

    def id_list(self, opener: str | None, closer: str, what: str) -> list[Token]:
        """Parse a comma-separated list of identifiers between ``opener`` and ``closer``."""
        if opener is not None:
            self.advance()
            if self.at(closer):
                self.advance()
                return []
        names = [self.expect_id(f"a {what} name")]
        while self.at(","):
            self.advance()
            names.append(self.expect_id(f"a {what} name"))
        if opener is not None:
            self.expect(closer, f"to close the {what} list")
        return names

    def check_formals(self, params: list[Token], qargs: list[Token]) -> None:
        """Refuse parameter or qubit names that repeat or clash."""
        seen: set[str] = set()
        for tok in params + qargs:
            self.new_name(tok, "gate parameter or argument")
            if tok.text in seen:
                raise self.error(f"'{tok.text}' is listed twice in the gate's signature", tok)
            seen.add(tok.text)

    def gate_body(
        self, name: Token, brace: Token, params: list[Token], qargs: list[Token]
    ) -> list[Call]:
        """Parse the statements of a gate body into calls of other gates."""
        env = {tok.text: i for i, tok in enumerate(params)}
        formal = {tok.text: i for i, tok in enumerate(qargs)}
        body = []
        while not self.at("}"):
            if self.tok.kind == "eof":
                raise self.error(
                    f"the body of gate '{name.text}' opened here is never closed; add '}}'", brace
                )
            call = self.body_statement(name.text, env, formal)
            if call is not None:
                body.append(call)
        self.advance()
        return body

    def body_statement(self, owner: str, env: dict[str, int], formal: dict[str, int]):
        """Parse one statement of a gate body (a call or a barrier)."""
        tok = self.tok
        if tok.kind != "id":
            raise self.error(
                f"expected a gate call in the body of '{owner}', found {describe(tok)}"
            )
        if tok.text in UNITARY_ONLY:
            raise self.unsupported(tok)
        if tok.text == "barrier":
            self.advance()
            self.formal_args(formal, owner)
            self.expect(";", "after the barrier")
            return None
        if tok.text in KEYWORDS - {"U", "CX"}:
            raise self.error(
                f"'{tok.text}' cannot appear inside a gate body; only gate calls and barrier can"
            )
        if tok.text == owner:
            raise self.error(
                f"gate '{owner}' cannot call itself: a gate is defined only after its body ends"
            )
        gate = self.lookup(self.advance())
        codes = self.param_list(env)
        args = self.formal_args(formal, owner)
        self.expect(";", f"after the call of '{tok.text}'")
        self.check_counts(gate, tok, len(codes), len(args))
        indices = tuple(formal[a.text] for a in args)
        self.check_distinct(indices, args, tok.text, lambda i: f"'{args[i].text}'")
        return Call(gate, tuple(codes), indices)

    def make_gate(self, name: Token, n_params: int, n_qubits: int, body, tokens) -> Gate:
        """Build the :class:`Gate` record of a parsed definition."""
        line, column = self.source.where(name.offset)
        origin = f"{self.source.name}:{line}:{column}"
        if EXTENSION_TOKENS.get(name.text) == tokens:
            return Gate(name.text, n_params, n_qubits, origin, native=name.text)
        depth = 1 + max((call.gate.depth for call in body), default=0)
        if depth > MAX_GATE_DEPTH:
            raise self.error(
                f"gate definitions nest deeper than {MAX_GATE_DEPTH} levels at '{name.text}'; "
                "flatten the definitions",
                name,
            )
        size = min(sum(call.gate.size for call in body), SIZE_CAP)
        return Gate(name.text, n_params, n_qubits, origin, None, True, tuple(body), size, depth)
