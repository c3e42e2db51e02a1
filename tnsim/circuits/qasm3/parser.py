"""Token-level parsing shared by every OpenQASM 3 statement; the language's reserved words."""

from __future__ import annotations

from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm.cursor import TokenCursor
from tnsim.circuits.qasm.lexer import Token
from tnsim.circuits.qasm3.expr import (
    CONSTANTS,
    FUNCTIONS,
    Code,
    MathError,
    evaluate,
    needs_number,
    parse_expression,
    to_qasm_error,
)
from tnsim.circuits.qasm3.lexer import Lexer
from tnsim.circuits.qasm3.library import BUILTINS, STDGATES, Gate
from tnsim.circuits.qasm3.program import Program
from tnsim.errors import QasmError

__all__ = ["KEYWORDS", "REFUSED", "TokenParser"]

REFUSED = {
    "if": "classical control flow (if/else)",
    "else": "classical control flow (if/else)",
    "while": "while loops (classical control flow)",
    "switch": "switch statements (classical control flow)",
    "case": "switch statements (classical control flow)",
    "default": "switch statements (classical control flow)",
    "break": "break (classical control flow)",
    "continue": "continue (classical control flow)",
    "end": "end (classical control flow)",
    "return": "return (subroutines)",
    "def": "subroutine definitions (def)",
    "extern": "extern functions",
    "defcal": "pulse calibrations (defcal)",
    "cal": "pulse-level code (cal)",
    "defcalgrammar": "calibration grammars (defcalgrammar)",
    "box": "timing boxes (box)",
    "delay": "delays (timing)",
    "duration": "durations (timing)",
    "stretch": "stretches (timing)",
    "durationof": "durations (timing)",
    "let": "aliases (let)",
    "output": "output variables",
    "readonly": "array references",
    "mutable": "array references",
    "array": "classical arrays",
    "opaque": "opaque gates (OpenQASM 2.0 only)",
    "int": "mutable classical variables",
    "uint": "mutable classical variables",
    "float": "mutable classical variables",
    "angle": "mutable classical variables",
    "bool": "mutable classical variables",
    "complex": "mutable classical variables",
    "pragma": "pragmas",
    "true": "classical values",
    "false": "classical values",
}
"""Words that start a construct tnsim refuses -> the construct's name."""

KEYWORDS = frozenset(REFUSED) | frozenset(
    [
        "OPENQASM",
        "include",
        "qubit",
        "qreg",
        "bit",
        "creg",
        "gate",
        "const",
        "input",
        "for",
        "in",
        "measure",
        "reset",
        "barrier",
        "gphase",
        "ctrl",
        "negctrl",
        "inv",
        "pow",
        "U",
        "sizeof",
        "void",
    ]
)
"""Words that cannot name a register, gate, constant or parameter."""

RESERVED = KEYWORDS | frozenset(CONSTANTS) | frozenset(FUNCTIONS)
"""Every name a program cannot declare."""


class TokenParser(TokenCursor):
    """Reads the tokens of one file (or text) into ``program``; helpers every parser uses."""

    program: Program

    LEXER = Lexer

    @property
    def constants(self) -> dict:
        """Names of constants and inputs with their values (substituted while parsing)."""
        return self.program.constants

    def new_name(self, tok: Token, kind: str) -> None:
        """Refuse a name that is reserved or already declared."""
        if tok.text in RESERVED:
            raise self.error(f"'{tok.text}' is a reserved word and cannot name a {kind}", tok)
        existing = self.program.kinds.get(tok.text)
        if existing is not None:
            raise self.error(
                f"'{tok.text}' is already declared as a {existing}; choose another name", tok
            )

    def expression(self, variables: dict | None = None) -> Code:
        """Parse one expression (constants and inputs substituted)."""
        return parse_expression(self, variables)

    def value(self, code: Code, env, tok: Token | None = None):
        """Evaluate ``code`` in ``env``; a failure is a :class:`QasmError` at its step."""
        try:
            return evaluate(code, env)
        except MathError as exc:
            raise to_qasm_error(exc, getattr(exc, "source", None) or self.source) from None

    def integer(self, code: Code, env, tok: Token, what: str) -> int:
        """The value of ``code`` as an integer, or an error naming ``what``."""
        value = self.value(code, env)
        if isinstance(value, AngleExpr):
            raise self.error(needs_number(what, value), tok)
        if isinstance(value, float):
            if not value.is_integer():
                raise self.error(f"{what} must be an integer, got {value!r}", tok)
            value = int(value)
        return value

    def constant_int(self, what: str, minimum: int = 0) -> tuple[int, Token]:
        """Parse a constant integer expression (at least ``minimum``)."""
        tok = self.tok
        value = self.integer(self.expression(), {}, tok, what)
        if value < minimum:
            raise self.error(f"{what} must be at least {minimum}, got {value}", tok)
        return value, tok

    def unknown_name_message(self, tok: Token) -> str:
        """Why a name in an expression is unknown, and what to do."""
        text = tok.text
        kind = self.program.kinds.get(text)
        if kind is not None:
            return f"'{text}' is a {kind} and has no value in an expression"
        return (
            f"unknown name '{text}' in an expression; declare it first ('const float[64] "
            f"{text} = ...;' or 'input float[64] {text};')"
        )

    def lookup(self, tok: Token) -> Gate:
        """The gate a name refers to, or an error naming the unknown gate."""
        gate = BUILTINS.get(tok.text) or self.program.gates.get(tok.text)
        if gate is not None:
            return gate
        if tok.text in STDGATES:
            hint = "it is defined in stdgates.inc: add 'include \"stdgates.inc\";' after the header"
        elif tok.text.lower() in self.program.gates or tok.text.lower() in STDGATES:
            hint = f"names are case-sensitive: did you mean '{tok.text.lower()}'?"
        elif tok.text in self.program.kinds:
            hint = f"'{tok.text}' is a {self.program.kinds[tok.text]}, not a gate"
        else:
            hint = f"define it with 'gate {tok.text} ... {{ ... }}' before using it"
        raise self.error(f"unknown gate '{tok.text}'; {hint}", tok)

    def refuse(self, tok: Token, construct: str) -> QasmError:
        """The error for a construct tnsim does not read."""
        return self.error(
            f"{construct} ('{tok.text}') not supported: tnsim reads the unitary part of "
            "OpenQASM 3 (gates, modifiers, constant loops, final measurements)",
            tok,
        )

    def check_counts(self, gate: Gate, tok: Token, n_params: int, n_qubits: int) -> None:
        """Refuse a call with the wrong number of parameters or qubits."""
        if n_params != gate.num_params:
            raise self.error(
                f"gate '{tok.text}' takes {gate.num_params} parameter(s), got {n_params}", tok
            )
        if n_qubits != gate.num_qubits:
            raise self.error(
                f"gate '{tok.text}' acts on {gate.num_qubits} qubit(s), got {n_qubits} "
                "argument(s) (after its control qubits)",
                tok,
            )
