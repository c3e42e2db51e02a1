"""Parsing OpenQASM 3 ``gate`` definitions (bodies with modifiers and ``gphase``)."""

from __future__ import annotations

from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm.lexer import Token, describe
from tnsim.circuits.qasm3.expr import Code, is_constant, needs_number
from tnsim.circuits.qasm3.extensions import EXTENSION_TOKENS3
from tnsim.circuits.qasm3.library import MAX_GATE_DEPTH, SIZE_CAP, Call, Gate, call_size
from tnsim.circuits.qasm3.parser import REFUSED, RESERVED, TokenParser

__all__ = ["DefinitionParser"]

MODIFIERS = ("ctrl", "negctrl", "inv", "pow")


class DefinitionParser(TokenParser):
    """The token parser, with modifiers and ``gate name(params) qubits { body }`` definitions."""

    def modifiers(self, variables: dict | None, *, in_body: bool) -> list[tuple]:
        """Parse ``ctrl @``, ``negctrl(n) @``, ``inv @``, ``pow(k) @`` prefixes.

        Returns ``(kind, value, token)`` triples, outermost first; ``value`` is the
        number of controls, 0 for ``inv``, and for ``pow`` the exponent (an
        integer, or code over loop variables to evaluate per iteration).
        """
        mods = []
        while self.tok.kind == "id" and self.tok.text in MODIFIERS:
            tok = self.advance()
            if tok.text == "inv":
                value = 0
            elif tok.text == "pow":
                self.expect("(", "after 'pow' (write pow(k) @ with an integer k)")
                code = self.expression(variables)
                self.expect(")", "to close the exponent of 'pow'")
                value = self.exponent(code, tok, in_body)
            elif self.at("("):
                self.advance()
                value = self.count(variables, f"the number of controls of '{tok.text}'")
                self.expect(")", f"to close the control count of '{tok.text}'")
            else:
                value = 1
            self.expect("@", f"after the modifier '{tok.text}'")
            mods.append((tok.text, value, tok))
        return mods

    def exponent(self, code: Code, tok: Token, in_body: bool):
        """A ``pow`` exponent: its integer value when constant, else the code."""
        if not is_constant(code):
            if in_body:
                raise self.error(
                    "the exponent of pow(k) @ inside a gate body must be a constant integer", tok
                )
            return code
        value = self.value(code, {})
        if isinstance(value, AngleExpr):
            raise self.error(needs_number("the exponent of pow(k) @", value), tok)
        if isinstance(value, float):
            if not value.is_integer():
                raise self.error(
                    f"pow({value!r}) @ is a non-integer power; tnsim reads integer powers only "
                    "(write the gate's own fractional form, e.g. 'sx' for pow(0.5) @ x)",
                    tok,
                )
            value = int(value)
        return value

    def count(self, variables: dict | None, what: str) -> int:
        """A constant positive integer (no loop variable or gate parameter in it)."""
        tok = self.tok
        code = self.expression(variables)
        if not is_constant(code):
            raise self.error(f"{what} must be a constant", tok)
        value = self.integer(code, {}, tok, what)
        if value < 1:
            raise self.error(f"{what} must be at least 1, got {value}", tok)
        return value

    def gate_definition(self) -> None:
        """Parse one ``gate`` definition and record the gate."""
        self.recording = []
        self.advance()
        name = self.expect_id("a gate name")
        self.new_name(name, "gate")
        params = self.id_list("(", ")", "parameter") if self.at("(") else []
        qargs = self.id_list(None, "{", "qubit argument")
        self.check_formals(params, qargs)
        brace = self.tok
        self.expect("{", f"to open the body of gate '{name.text}'")
        body = self.gate_body(name, brace, params, qargs)
        tokens, self.recording = tuple(self.recording), None
        gate = self.make_gate(name, len(params), len(qargs), body, tokens)
        self.program.gates[name.text] = gate
        self.program.kinds[name.text] = "gate"

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
        """Refuse parameter or qubit names that repeat or are reserved (they may shadow others)."""
        seen: set[str] = set()
        for tok in params + qargs:
            if tok.text in RESERVED:
                raise self.error(
                    f"'{tok.text}' is a reserved word and cannot name a gate parameter or argument",
                    tok,
                )
            if tok.text in seen:
                raise self.error(f"'{tok.text}' is listed twice in the gate's signature", tok)
            seen.add(tok.text)

    def gate_body(
        self, name: Token, brace: Token, params: list[Token], qargs: list[Token]
    ) -> list[Call]:
        """Parse the statements of a gate body into calls."""
        variables = {tok.text: i for i, tok in enumerate(params)}
        formal = {tok.text: i for i, tok in enumerate(qargs)}
        body = []
        while not self.at("}"):
            if self.tok.kind == "eof":
                raise self.error(
                    f"the body of gate '{name.text}' opened here is never closed; add '}}'", brace
                )
            call = self.body_statement(name.text, variables, formal)
            if call is not None:
                body.append(call)
        self.advance()
        return body

    def body_statement(self, owner: str, variables: dict, formal: dict):
        """Parse one statement of a gate body (a call, ``gphase`` or a barrier)."""
        tok = self.tok
        if tok.kind != "id":
            raise self.error(
                f"expected a gate call in the body of '{owner}', found {describe(tok)}"
            )
        if tok.text == "barrier":
            self.advance()
            if not self.at(";"):
                self.formal_args(formal, owner)
            self.expect(";", "after the barrier")
            return None
        if tok.text in REFUSED:
            raise self.refuse(tok, REFUSED[tok.text])
        if tok.text in ("measure", "reset", "for", "qubit", "bit", "const", "input", "gate"):
            raise self.error(
                f"'{tok.text}' cannot appear inside a gate body; only gate calls, gphase and "
                "barrier can"
            )
        mods = self.modifiers(variables, in_body=True)
        head = self.advance()
        if head.kind != "id":
            raise self.error(f"expected a gate name after the modifiers, found {describe(head)}")
        if head.text == owner:
            raise self.error(
                f"gate '{owner}' cannot call itself: a gate is defined only after its body ends",
                head,
            )
        gate = None if head.text == "gphase" else self.lookup(head)
        codes = self.param_list(variables)
        args = [] if self.at(";") else self.formal_args(formal, owner)
        self.expect(";", f"after the call of '{head.text}'")
        controls = sum(v for k, v, _ in mods if k in ("ctrl", "negctrl"))
        if gate is None:
            self.check_phase_call(head, len(codes), len(args), controls)
        else:
            self.check_counts(gate, head, len(codes), len(args) - controls)
        indices = tuple(formal[a.text] for a in args)
        for j, i in enumerate(indices):
            if i in indices[:j]:
                raise self.error(
                    f"'{args[j].text}' appears twice in '{head.text}'; a gate needs distinct "
                    "qubits",
                    args[j],
                )
        modifiers = tuple((k, v) for k, v, _ in mods)
        return Call(gate, modifiers, tuple(codes), indices)

    def check_phase_call(self, head: Token, n_params: int, n_args: int, controls: int) -> None:
        """Refuse ``gphase`` without exactly one parameter, or on qubits other than its controls."""
        if n_params != 1:
            raise self.error(f"gphase takes 1 parameter (the phase), got {n_params}", head)
        if n_args != controls:
            raise self.error(
                f"gphase acts on no qubit: give only the {controls} control qubit(s) of its "
                f"modifiers, got {n_args} argument(s)",
                head,
            )

    def param_list(self, variables: dict | None) -> list[Code]:
        """Parse a parenthesised parameter list into compiled expressions."""
        if not self.at("("):
            return []
        self.advance()
        codes: list[Code] = []
        if self.at(")"):
            self.advance()
            return codes
        codes.append(self.expression(variables))
        while self.at(","):
            self.advance()
            codes.append(self.expression(variables))
        self.expect(")", "to close the parameter list")
        if self.at("["):
            raise self.refuse(self.tok, "gate durations (timing)")
        return codes

    def make_gate(self, name: Token, n_params: int, n_qubits: int, body, tokens) -> Gate:
        """Build the :class:`Gate` record of a parsed definition."""
        line, column = self.source.where(name.offset)
        origin = f"{self.source.name}:{line}:{column}"
        if EXTENSION_TOKENS3.get(name.text) == tokens:
            return Gate(name.text, n_params, n_qubits, origin, native=name.text)
        depth = 1 + max((call.gate.depth for call in body if call.gate is not None), default=0)
        if depth > MAX_GATE_DEPTH:
            raise self.error(
                f"gate definitions nest deeper than {MAX_GATE_DEPTH} levels at '{name.text}'; "
                "flatten the definitions",
                name,
            )
        size = min(sum(call_size(call.gate, call.modifiers) for call in body), SIZE_CAP)
        return Gate(
            name.text, n_params, n_qubits, origin, None, tuple(body), size, depth, self.source
        )
