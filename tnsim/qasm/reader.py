"""OpenQASM 2.0 reader and writer.

The language is the one of Cross, Bishop, Smolin and Gambetta, "Open Quantum
Assembly Language", arXiv:1707.03429 (2017).  tnsim reads it with its own
lexer, a recursive-descent parser and a small arithmetic evaluator for gate
parameters (no Python ``eval``).

What the reader accepts
-----------------------
* The header ``OPENQASM 2.0;`` (required), ``//`` comments, any number of
  ``qreg`` and ``creg`` declarations.  Qubit registers are numbered in
  declaration order: after ``qreg a[2]; qreg b[3];`` qubit ``b[0]`` is qubit 2.
* ``include "qelib1.inc";`` is served from a built-in gate table
  (:data:`QELIB1_GATES`); no file is read.  Each of its gates is read as the
  tnsim gate of the same name, whose matrix is documented in
  :mod:`tnsim.gates` (``u0`` is the identity).  The built-ins ``U`` and ``CX``
  are always available and become ``u`` and ``cx``.  Any other include must
  be a plain file name of a file beside the circuit file; its gate
  definitions are read with the same rules.
* ``gate`` definitions with parameters, expanded where they are used; calls
  to earlier definitions nest (at most :data:`MAX_GATE_DEPTH` levels).
* Register broadcasting: ``h q;`` applies ``h`` to every qubit of ``q``;
  ``cx a, b;`` pairs equal-size registers; single qubits repeat alongside.
* Parameter arithmetic: numbers, ``pi``, ``+ - * / ^`` (``^`` is a
  right-associative power, binding tighter than unary minus, so
  ``-2^2 == -4``), parentheses and ``sin cos tan exp ln sqrt``.
* ``barrier`` and ``measure`` are checked and otherwise ignored: tnsim computes
  the state before measurement, so a gate on a qubit that was already
  measured is refused.  ``reset``, ``if`` and ``opaque`` are refused: tnsim
  simulates unitary circuits only.

Every problem raises :class:`tnsim.errors.QasmError` with ``file:line:column``
(1-based) of the offending token.  Expansion is counted before it happens: a
program that would produce more than ``max_ops`` operations is refused at once.

tnsim extension
---------------
``iswap``, ``ryy`` and ``fsim`` are not in qelib1.inc.  :func:`write_qasm` emits
a ``gate`` definition for each one a circuit uses (:data:`EXTENSION_DEFINITIONS`),
an exact decomposition into qelib1 gates, so the file stays valid OpenQASM 2.0
for any reader.  When tnsim reads a definition whose tokens equal one of those
texts, it keeps the gate as the single native tnsim operation; any other
definition of those names is an ordinary user gate.
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import NamedTuple

from .circuit import Circuit, Operation
from .errors import InputError, QasmError
from .gates import GATES

__all__ = [
    "read_qasm",
    "write_qasm",
    "QELIB1_GATES",
    "EXTENSION_DEFINITIONS",
    "DEFAULT_MAX_OPS",
    "MAX_GATE_DEPTH",
    "MAX_EXPR_DEPTH",
]

DEFAULT_MAX_OPS = 10_000_000
"""Default cap on the number of operations a program may expand to."""

MAX_GATE_DEPTH = 100
"""Deepest allowed nesting of gate definitions calling one another."""

MAX_EXPR_DEPTH = 100
"""Deepest allowed nesting of parentheses, unary signs and powers in an expression."""

MAX_INCLUDE_DEPTH = 8
"""Deepest allowed chain of included files."""

_QELIB1_NAMES = (
    "u3 u2 u1 cx id u p x y z h s sdg t tdg sx sxdg rx ry rz cz cy ch swap ccx cswap "
    "crx cry crz cu1 cp cu3 rxx rzz"
).split()

QELIB1_GATES: dict[str, str] = {name: name for name in _QELIB1_NAMES} | {"u0": "id"}
"""qelib1.inc gate name -> the tnsim gate it is read as (``u0(γ)`` is the identity)."""

_BUILTIN_NAMES = {"U": "u", "CX": "cx"}

EXTENSION_DEFINITIONS: dict[str, str] = {
    "ryy": (
        "gate ryy(theta) a, b {\n  rx(pi/2) a;\n  rx(pi/2) b;\n  rzz(theta) a, b;\n"
        "  rx(-pi/2) a;\n  rx(-pi/2) b;\n}"
    ),
    "iswap": (
        "gate iswap a, b {\n  rxx(-pi/2) a, b;\n  rx(pi/2) a;\n  rx(pi/2) b;\n"
        "  rzz(-pi/2) a, b;\n  rx(-pi/2) a;\n  rx(-pi/2) b;\n}"
    ),
    "fsim": (
        "gate fsim(theta, phi) a, b {\n  rxx(theta) a, b;\n  rx(pi/2) a;\n  rx(pi/2) b;\n"
        "  rzz(theta) a, b;\n  rx(-pi/2) a;\n  rx(-pi/2) b;\n  cp(-phi) a, b;\n}"
    ),
}
"""Exact qelib1 decompositions that :func:`write_qasm` emits for tnsim's extra gates.

``ryy(θ) = (Rx(-π/2)⊗Rx(-π/2)) · rzz(θ) · (Rx(π/2)⊗Rx(π/2))`` because
``Rx(π/2)† Z Rx(π/2) = Y``; ``fsim(θ, φ) = rxx(θ) · ryy(θ) · cp(-φ)`` (the three
commute); ``iswap = rxx(-π/2) · ryy(-π/2)``.  No global phase is dropped.
"""

_KEYWORDS = frozenset(
    "OPENQASM include qreg creg gate opaque barrier measure reset if U CX pi".split()
)
_FUNCTIONS = frozenset("sin cos tan exp ln sqrt".split())
_RESERVED = _KEYWORDS | _FUNCTIONS
_UNITARY_ONLY = ("reset", "if", "opaque")

# ---------------------------------------------------------------------------- lexer

_TOKEN_RE = re.compile(
    r"""
    [ \t\r\f\v]*
    (?:
      (?P<nl>\n)
    | (?P<comment>//[^\n]*)
    | (?P<real>(?:[0-9]+\.[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[0-9]+[eE][+-]?[0-9]+)
    | (?P<int>[0-9]+)
    | (?P<id>[A-Za-z_][A-Za-z0-9_]*)
    | (?P<string>"[^"\n]*")
    | (?P<sym>->|==|[;,()\[\]{}+\-*/^])
    | (?P<end>\Z)
    )
    """,
    re.VERBOSE | re.ASCII,
)


class _Token(NamedTuple):
    kind: str  # "id", "int", "real", "string", "sym" or "eof"
    text: str
    line: int
    column: int


def _describe(tok: _Token) -> str:
    if tok.kind == "eof":
        return "the end of the file"
    return f"'{tok.text}'" if len(tok.text) <= 40 else f"'{tok.text[:37]}...'"


def _tokens(text: str, source: str) -> Iterator[_Token]:
    """Yield the tokens of ``text`` lazily, ending with one ``eof`` token."""
    match_at, line, line_start = _TOKEN_RE.match, 1, 0
    pos = 0
    while True:
        match = match_at(text, pos)
        if match is None:  # only the leading blanks matched nothing usable
            start = len(text) - len(text[pos:].lstrip(" \t\r\f\v"))
            raise _bad_character(text[start], source, line, start - line_start + 1)
        kind = match.lastgroup
        start, pos = match.start(kind), match.end()
        if kind == "nl":
            line, line_start = line + 1, pos
        elif kind == "end":
            yield _Token("eof", "", line, start - line_start + 1)
            return
        elif kind != "comment":
            yield _Token(kind, text[start:pos], line, start - line_start + 1)


def _bad_character(char: str, source: str, line: int, column: int) -> QasmError:
    if char == '"':
        return QasmError(
            "unterminated string; close it with '\"' on the same line", source, line, column
        )
    return QasmError(
        f"unexpected character {char!r}; remove it (OpenQASM 2.0 statements use ASCII "
        "letters, digits, '_' and ; , ( ) [ ] { } + - * / ^ ->)",
        source,
        line,
        column,
    )


# ---------------------------------------------------------------------------- expressions

_NUM, _ARG, _NEG, _BIN, _FN = range(5)
_BINARY = {"+": (1, False), "-": (1, False), "*": (2, False), "/": (2, False), "^": (4, True)}
_UNARY_PREC = 3

_Pos = tuple[str, int, int]
_Code = tuple[tuple[int, object, _Pos], ...]


class _MathError(Exception):
    """An expression that has no finite real value, with where it failed."""

    def __init__(self, message: str, pos: _Pos):
        super().__init__(message)
        self.message, self.pos = message, pos


def _binary(op: str, a: float, b: float, pos: _Pos) -> float:
    try:
        if op == "+":
            value = a + b
        elif op == "-":
            value = a - b
        elif op == "*":
            value = a * b
        elif op == "/":
            if b == 0:
                raise _MathError(f"division by zero ({a!r} / {b!r}); fix the divisor", pos)
            value = a / b
        else:
            value = math.pow(a, b)
    except (OverflowError, ValueError):
        raise _MathError(f"{a!r} {op} {b!r} is not a finite real number", pos) from None
    if not math.isfinite(value):
        raise _MathError(f"{a!r} {op} {b!r} overflows to {value!r}; use smaller values", pos)
    return value


def _function(name: str, x: float, pos: _Pos) -> float:
    func = {
        "sin": math.sin,
        "cos": math.cos,
        "tan": math.tan,
        "exp": math.exp,
        "ln": math.log,
        "sqrt": math.sqrt,
    }[name]
    try:
        value = func(x)
    except (OverflowError, ValueError):
        raise _MathError(f"{name}({x!r}) is not a finite real number", pos) from None
    if not math.isfinite(value):
        raise _MathError(f"{name}({x!r}) is not a finite real number", pos)
    return value


def _evaluate(code: _Code, args: tuple[float, ...]) -> float:
    """Run postfix ``code`` with gate parameters ``args`` (iterative: no recursion)."""
    stack: list[float] = []
    for kind, value, pos in code:
        if kind == _NUM:
            stack.append(value)
        elif kind == _ARG:
            stack.append(args[value])
        elif kind == _NEG:
            stack[-1] = -stack[-1]
        elif kind == _BIN:
            b = stack.pop()
            stack[-1] = _binary(value, stack[-1], b, pos)
        else:
            stack[-1] = _function(value, stack[-1], pos)
    return stack[0]


# ---------------------------------------------------------------------------- gates


@dataclass(frozen=True)
class _Call:
    """One gate call inside a definition: callee, parameter code, formal qubit indices."""

    gate: _Gate
    params: tuple[_Code, ...]
    args: tuple[int, ...]


@dataclass(frozen=True)
class _Gate:
    """A gate the program can call: native (one tnsim operation) or a definition."""

    name: str
    num_params: int
    num_qubits: int
    origin: str
    native: str | None = None
    keep_params: bool = True
    body: tuple[_Call, ...] = ()
    size: int = 1
    depth: int = 0


def _native(qasm_name: str, tnsim_name: str, origin: str) -> _Gate:
    spec = GATES[tnsim_name]
    if qasm_name == "u0":
        return _Gate("u0", 1, 1, origin, "id", keep_params=False)
    return _Gate(qasm_name, spec.num_params, spec.num_qubits, origin, tnsim_name)


_BUILTINS = {q: _native(q, t, "the OpenQASM 2.0 language") for q, t in _BUILTIN_NAMES.items()}
_QELIB1 = {q: _native(q, t, "qelib1.inc") for q, t in QELIB1_GATES.items()}
_SIZE_CAP = 1 << 62


def _expand(gate: _Gate, params: tuple[float, ...], qubits: tuple[int, ...], out: list) -> None:
    """Append ``(tnsim name, qubits, params)`` of ``gate`` applied to ``qubits`` to ``out``."""
    if gate.native is not None:
        out.append((gate.native, qubits, params if gate.keep_params else ()))
        return
    for call in gate.body:
        values = tuple(_evaluate(code, params) for code in call.params)
        _expand(call.gate, values, tuple(qubits[i] for i in call.args), out)


def _canonical(text: str) -> tuple[tuple[str, str], ...]:
    return tuple((t.kind, t.text) for t in _tokens(text, "<definition>") if t.kind != "eof")


_EXTENSION_TOKENS = {name: _canonical(text) for name, text in EXTENSION_DEFINITIONS.items()}


# ---------------------------------------------------------------------------- program state


class _Program:
    """What the statements of a program (and its includes) build up."""

    def __init__(self, source: str, max_ops: int):
        self.source = source
        self.max_ops = max_ops
        self.gates: dict[str, _Gate] = {}
        self.qregs: dict[str, tuple[int, int]] = {}  # name -> (offset, size)
        self.cregs: dict[str, int] = {}
        self.num_qubits = 0
        self.ops: list[Operation] = []
        self.op_count = 0
        self.measured: set[int] = set()
        self.measured_regs: set[str] = set()
        self.include_stack: list[str] = []

    def qubit_name(self, qubit: int) -> str:
        for name, (offset, size) in self.qregs.items():
            if offset <= qubit < offset + size:
                return f"{name}[{qubit - offset}]"
        return f"qubit {qubit}"

    def was_measured(self, qubit: int) -> bool:
        if qubit in self.measured:
            return True
        return any(
            self.qregs[name][0] <= qubit < sum(self.qregs[name]) for name in self.measured_regs
        )

    def circuit(self, eof: _Token, source: str) -> Circuit:
        if not self.qregs:
            raise QasmError(
                "the program declares no qubit register; add one, e.g. 'qreg q[2];'",
                source,
                eof.line,
                eof.column,
            )
        circuit = Circuit(self.num_qubits)
        circuit.ops.extend(self.ops)  # every operation was validated while parsing
        return circuit


class _Arg(NamedTuple):
    """A quantum or classical argument: the indices it names, whether a whole register."""

    indices: range
    register: bool
    token: _Token


# ---------------------------------------------------------------------------- parser


class _Parser:
    """Recursive-descent parser for one file (or text) of a program."""

    def __init__(self, text: str, source: str, directory: Path | None, program: _Program):
        self.source, self.directory, self.program = source, directory, program
        self._lexer = _tokens(text, source)
        self.tok = next(self._lexer)
        self.recording: list[tuple[str, str]] | None = None
        self.env: dict[str, int] | None = None
        self.code: list = []
        self.expr_depth = 0

    # -- token helpers

    def advance(self) -> _Token:
        tok = self.tok
        if self.recording is not None:
            self.recording.append((tok.kind, tok.text))
        if tok.kind != "eof":
            self.tok = next(self._lexer)
        return tok

    def error(self, message: str, tok: _Token | None = None) -> QasmError:
        tok = self.tok if tok is None else tok
        return QasmError(message, self.source, tok.line, tok.column)

    def at(self, text: str) -> bool:
        return self.tok.kind in ("sym", "id") and self.tok.text == text

    def expect(self, text: str, context: str = "") -> _Token:
        if not self.at(text):
            hint = " (every statement ends with ';')" if text == ";" else ""
            where = f" {context}" if context else ""
            raise self.error(f"expected '{text}'{where}, found {_describe(self.tok)}{hint}")
        return self.advance()

    def expect_id(self, what: str) -> _Token:
        if self.tok.kind != "id":
            raise self.error(f"expected {what}, found {_describe(self.tok)}")
        return self.advance()

    def expect_int(self, what: str) -> tuple[int, _Token]:
        tok = self.tok
        if tok.kind != "int":
            raise self.error(f"expected {what} (a non-negative integer), found {_describe(tok)}")
        self.advance()
        if len(tok.text) > 15:
            raise self.error(f"{what} {tok.text} is too large", tok)
        return int(tok.text), tok

    def pos(self, tok: _Token) -> _Pos:
        return (self.source, tok.line, tok.column)

    # -- program structure

    def parse(self, *, main: bool) -> _Token:
        """Parse every statement; return the ``eof`` token."""
        self.header(required=main)
        while self.tok.kind != "eof":
            self.statement(main)
        return self.tok

    def header(self, *, required: bool) -> None:
        if not self.at("OPENQASM"):
            if required:
                raise self.error(
                    "missing header: an OpenQASM 2.0 program starts with 'OPENQASM 2.0;'"
                )
            return
        self.advance()
        version = self.tok
        if version.kind not in ("int", "real"):
            raise self.error(f"expected the version 2.0 after OPENQASM, found {_describe(version)}")
        self.advance()
        if float(version.text) != 2.0:
            raise self.error(
                f"unsupported OpenQASM version {version.text}; tnsim reads OpenQASM 2.0 only",
                version,
            )
        self.expect(";", "after the OPENQASM header")

    def statement(self, main: bool) -> None:
        tok = self.tok
        word = tok.text if tok.kind == "id" else None
        if word in _UNITARY_ONLY:
            raise self.unsupported(tok)
        if word == "include":
            return self.include()
        if word == "gate":
            return self.gate_definition()
        if word == "OPENQASM":
            raise self.error("the OPENQASM header may appear only once, at the very start")
        if not main:
            raise self.error(
                f"an included file may hold only gate definitions, found {_describe(tok)}; "
                "move it into the main program"
            )
        if word in ("qreg", "creg"):
            return self.register(word)
        if word == "barrier":
            return self.barrier()
        if word == "measure":
            return self.measure()
        if word is None:
            raise self.error(f"expected a statement, found {_describe(tok)}")
        return self.application()

    def unsupported(self, tok: _Token) -> QasmError:
        return self.error(
            f"'{tok.text}' is not supported: tnsim simulates unitary circuits only; remove the "
            f"'{tok.text}' statement (measure at the end instead)",
            tok,
        )

    # -- includes

    def include(self) -> None:
        self.advance()
        name_tok = self.tok
        if name_tok.kind != "string":
            raise self.error(f"expected a file name in double quotes, found {_describe(name_tok)}")
        self.advance()
        self.expect(";", "after the include")
        filename = name_tok.text[1:-1]
        if filename == "qelib1.inc":
            self.include_qelib1(name_tok)
        else:
            self.include_file(filename, name_tok)

    def include_qelib1(self, tok: _Token) -> None:
        for name, gate in _QELIB1.items():
            if name in self.program.gates:
                raise self.error(
                    f"qelib1.inc defines gate '{name}', already defined by "
                    f"{self.program.gates[name].origin}; include qelib1.inc once, before your "
                    "own gate definitions",
                    tok,
                )
            self.program.gates[name] = gate

    def include_file(self, filename: str, tok: _Token) -> None:
        path = self.resolve_include(filename, tok)
        key = os.path.abspath(path)
        if key in self.program.include_stack:
            raise self.error(f"'{filename}' includes itself (directly or indirectly)", tok)
        if len(self.program.include_stack) >= MAX_INCLUDE_DEPTH:
            raise self.error(f"includes nest deeper than {MAX_INCLUDE_DEPTH} files", tok)
        try:
            text = _read_text(path)
        except InputError as exc:
            raise self.error(f"cannot include '{filename}': {exc}", tok) from None
        self.program.include_stack.append(key)
        _Parser(text, str(path), path.parent, self.program).parse(main=False)
        self.program.include_stack.pop()

    def resolve_include(self, filename: str, tok: _Token) -> Path:
        if self.directory is None:
            raise self.error(
                f"cannot include '{filename}' when reading text: only qelib1.inc is built in; "
                "read the program from a file with the include beside it, or paste the gate "
                "definitions into the program",
                tok,
            )
        if not filename or filename in (".", "..") or any(c in filename for c in "/\\\0:"):
            raise self.error(
                f"include '{filename}' must be a plain file name of a file beside the circuit "
                "file (no directories)",
                tok,
            )
        path = self.directory / filename
        if not path.is_file():
            raise self.error(
                f"include file '{filename}' not found (looked for {path}); only qelib1.inc is "
                "built in, other includes must sit beside the circuit file",
                tok,
            )
        return path

    # -- declarations

    def new_name(self, tok: _Token, kind: str) -> None:
        if tok.text in _RESERVED:
            raise self.error(f"'{tok.text}' is a reserved word and cannot name a {kind}", tok)

    def register(self, kind: str) -> None:
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
        self.expect("]", "after the register size")
        self.expect(";", f"after the declaration of '{name.text}'")
        if kind == "qreg":
            self.program.qregs[name.text] = (self.program.num_qubits, size)
            self.program.num_qubits += size
        else:
            self.program.cregs[name.text] = size

    # -- gate definitions

    def gate_definition(self) -> None:
        self.recording = []
        self.advance()
        name = self.expect_id("a gate name")
        self.check_gate_name(name)
        params = self.id_list("(", ")", "parameter") if self.at("(") else []
        qargs = self.id_list(None, "{", "qubit argument")
        self.check_formals(params, qargs)
        brace = self.tok
        self.expect("{", f"to open the body of gate '{name.text}'")
        body = self.gate_body(name, brace, params, qargs)
        tokens, self.recording = tuple(self.recording), None
        self.program.gates[name.text] = self.make_gate(name, len(params), len(qargs), body, tokens)

    def check_gate_name(self, name: _Token) -> None:
        self.new_name(name, "gate")
        existing = self.program.gates.get(name.text)
        if existing is not None:
            raise self.error(
                f"gate '{name.text}' is already defined by {existing.origin}; choose another name",
                name,
            )

    def id_list(self, opener: str | None, closer: str, what: str) -> list[_Token]:
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

    def check_formals(self, params: list[_Token], qargs: list[_Token]) -> None:
        seen: set[str] = set()
        for tok in params + qargs:
            self.new_name(tok, "gate parameter or argument")
            if tok.text in seen:
                raise self.error(f"'{tok.text}' is listed twice in the gate's signature", tok)
            seen.add(tok.text)

    def gate_body(
        self, name: _Token, brace: _Token, params: list[_Token], qargs: list[_Token]
    ) -> list[_Call]:
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
        tok = self.tok
        if tok.kind != "id":
            raise self.error(
                f"expected a gate call in the body of '{owner}', found {_describe(tok)}"
            )
        if tok.text in _UNITARY_ONLY:
            raise self.unsupported(tok)
        if tok.text == "barrier":
            self.advance()
            self.formal_args(formal, owner)
            self.expect(";", "after the barrier")
            return None
        if tok.text in _KEYWORDS - {"U", "CX"}:
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
        return _Call(gate, tuple(codes), indices)

    def formal_args(self, formal: dict[str, int], owner: str) -> list[_Token]:
        args = []
        while True:
            tok = self.expect_id(f"a qubit argument of gate '{owner}'")
            if tok.text not in formal:
                raise self.error(
                    f"'{tok.text}' is not a qubit argument of gate '{owner}' "
                    f"(its arguments: {', '.join(formal)})",
                    tok,
                )
            if self.at("["):
                raise self.error(
                    "qubit arguments inside a gate body are the gate's own names, without indices"
                )
            args.append(tok)
            if not self.at(","):
                return args
            self.advance()

    def make_gate(self, name: _Token, n_params: int, n_qubits: int, body, tokens) -> _Gate:
        origin = f"{self.source}:{name.line}:{name.column}"
        if _EXTENSION_TOKENS.get(name.text) == tokens:
            return _Gate(name.text, n_params, n_qubits, origin, native=name.text)
        depth = 1 + max((call.gate.depth for call in body), default=0)
        if depth > MAX_GATE_DEPTH:
            raise self.error(
                f"gate definitions nest deeper than {MAX_GATE_DEPTH} levels at '{name.text}'; "
                "flatten the definitions",
                name,
            )
        size = min(sum(call.gate.size for call in body), _SIZE_CAP)
        return _Gate(name.text, n_params, n_qubits, origin, None, True, tuple(body), size, depth)

    # -- gate calls at the top level

    def lookup(self, tok: _Token) -> _Gate:
        gate = _BUILTINS.get(tok.text) or self.program.gates.get(tok.text)
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

    def param_list(self, env: dict[str, int] | None) -> list[_Code]:
        if not self.at("("):
            return []
        self.advance()
        codes: list[_Code] = []
        if self.at(")"):
            self.advance()
            return codes
        codes.append(self.expression(env))
        while self.at(","):
            self.advance()
            codes.append(self.expression(env))
        self.expect(")", "to close the parameter list")
        return codes

    def check_counts(self, gate: _Gate, tok: _Token, n_params: int, n_qubits: int) -> None:
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
        if len(set(qubits)) == len(qubits):
            return
        for j, q in enumerate(qubits):
            if q in qubits[:j]:
                raise self.error(
                    f"{label(j)} appears twice in '{gate_name}'; a gate needs distinct qubits",
                    args[j].token if isinstance(args[j], _Arg) else args[j],
                )

    def application(self) -> None:
        tok = self.advance()
        gate = self.lookup(tok)
        codes = self.param_list(None)
        args = self.arg_list(quantum=True)
        self.expect(";", f"after the call of '{tok.text}'")
        self.check_counts(gate, tok, len(codes), len(args))
        values = tuple(self.constant(code) for code in codes)
        count = self.broadcast_size(args)
        self.reserve(gate.size * count, tok)
        template: list = []
        try:
            _expand(gate, values, tuple(range(gate.num_qubits)), template)
        except _MathError as exc:
            source, line, column = exc.pos
            note = f" (in gate '{tok.text}' called at {self.source}:{tok.line}:{tok.column})"
            raise QasmError(exc.message + note, source, line, column) from None
        # An empty body emits nothing: check one instance instead of looping over a huge register.
        for i in range(count if template else min(count, 1)):
            qubits = tuple(a.indices[i] if a.register else a.indices[0] for a in args)
            self.check_distinct(qubits, args, tok.text, lambda j, q=qubits: self.qname(q[j]))
            self.emit(template, qubits, tok)

    def qname(self, qubit: int) -> str:
        return f"qubit {self.program.qubit_name(qubit)}"

    def emit(self, template: list, qubits: tuple[int, ...], tok: _Token) -> None:
        ops = self.program.ops
        for name, formal, params in template:
            mapped = tuple(qubits[i] for i in formal)
            if self.program.measured or self.program.measured_regs:
                self.check_unmeasured(mapped, tok)
            ops.append(Operation(name, mapped, params))

    def check_unmeasured(self, qubits: tuple[int, ...], tok: _Token) -> None:
        for q in qubits:
            if self.program.was_measured(q):
                raise self.error(
                    f"gate '{tok.text}' acts on {self.qname(q)} after it was measured; tnsim "
                    "simulates unitary circuits only: move measurements to the end",
                    tok,
                )

    def reserve(self, count: int, tok: _Token) -> None:
        total = self.program.op_count + count
        if total > self.program.max_ops:
            raise self.error(
                f"the program expands to more than max_ops={self.program.max_ops} operations "
                f"(this statement adds {count}); raise max_ops if you mean it",
                tok,
            )
        self.program.op_count = total

    def broadcast_size(self, args: list[_Arg]) -> int:
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

    def arg_list(self, *, quantum: bool) -> list[_Arg]:
        args = [self.argument(quantum)]
        while self.at(","):
            self.advance()
            args.append(self.argument(quantum))
        return args

    def argument(self, quantum: bool) -> _Arg:
        kind = "qubit" if quantum else "classical"
        tok = self.expect_id(f"a {kind} register name")
        offset, size = self.find_register(tok, quantum)
        if not self.at("["):
            return _Arg(range(offset, offset + size), True, tok)
        self.advance()
        index, index_tok = self.expect_int("an index")
        if index >= size:
            raise self.error(
                f"index {index} is out of range for register '{tok.text}' of size {size} "
                f"(valid: 0..{size - 1})",
                index_tok,
            )
        self.expect("]", "after the index")
        return _Arg(range(offset + index, offset + index + 1), False, tok)

    def find_register(self, tok: _Token, quantum: bool) -> tuple[int, int]:
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

    # -- barrier and measure

    def barrier(self) -> None:
        self.advance()
        self.arg_list(quantum=True)
        self.expect(";", "after the barrier")

    def measure(self) -> None:
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

    # -- expressions

    def expression(self, env: dict[str, int] | None) -> _Code:
        self.env, self.code, self.expr_depth = env, [], 0
        self.expr(0)
        return tuple(self.code)

    def constant(self, code: _Code) -> float:
        try:
            return _evaluate(code, ())
        except _MathError as exc:
            raise QasmError(exc.message, *exc.pos) from None

    def expr(self, min_prec: int) -> None:
        self.expr_depth += 1
        if self.expr_depth > MAX_EXPR_DEPTH:
            raise self.error(f"expression nested deeper than {MAX_EXPR_DEPTH} levels; simplify it")
        self.unary()
        while self.tok.kind == "sym" and self.tok.text in _BINARY:
            prec, right_assoc = _BINARY[self.tok.text]
            if prec < min_prec:
                break
            op = self.advance()
            self.expr(prec if right_assoc else prec + 1)
            self.code.append((_BIN, op.text, self.pos(op)))
        self.expr_depth -= 1

    def unary(self) -> None:
        if self.at("-") or self.at("+"):
            op = self.advance()
            self.expr(_UNARY_PREC)
            if op.text == "-":
                self.code.append((_NEG, None, self.pos(op)))
            return
        self.primary()

    def primary(self) -> None:
        tok = self.tok
        if tok.kind in ("int", "real"):
            self.advance()
            value = float(tok.text)
            if not math.isfinite(value):
                raise self.error(f"number {tok.text[:20]}... is too large", tok)
            self.code.append((_NUM, value, self.pos(tok)))
        elif tok.kind == "id":
            self.name_in_expression(tok)
        elif self.at("("):
            self.advance()
            self.expr(0)
            self.expect(")", "to close the parenthesis")
        else:
            raise self.error(
                f"expected a number, 'pi', a parameter, a function or '(' in the expression, "
                f"found {_describe(tok)}"
            )

    def name_in_expression(self, tok: _Token) -> None:
        self.advance()
        if tok.text == "pi":
            self.code.append((_NUM, math.pi, self.pos(tok)))
        elif tok.text in _FUNCTIONS:
            self.expect("(", f"after the function '{tok.text}'")
            self.expr(0)
            self.expect(")", f"to close the argument of '{tok.text}'")
            self.code.append((_FN, tok.text, self.pos(tok)))
        elif self.env is not None and tok.text in self.env:
            self.code.append((_ARG, self.env[tok.text], self.pos(tok)))
        elif self.env is None:
            raise self.error(
                f"unknown name '{tok.text}' in an expression; use numbers, pi, + - * / ^, "
                "parentheses and sin cos tan exp ln sqrt",
                tok,
            )
        else:
            known = ", ".join(self.env) or "none"
            raise self.error(
                f"unknown parameter '{tok.text}' (the gate's parameters: {known})", tok
            )


# ---------------------------------------------------------------------------- public API


def _read_text(path: Path) -> str:
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read '{path}': {exc.strerror or exc}; check the path") from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        column = exc.start - (data.rfind(b"\n", 0, exc.start) + 1) + 1
        raise QasmError("the file is not UTF-8 text", str(path), line, column) from None


def _names_file(text: str) -> bool:
    if "\n" in text or "OPENQASM" in text or "\0" in text or not text.strip():
        return False
    try:
        return os.path.isfile(text)
    except (OSError, ValueError):
        return False


def _looks_like_missing_file(text: str) -> bool:
    stripped = text.strip()
    return bool(stripped) and not any(c in stripped for c in ";\n\0 \t") and "." in stripped


def read_qasm(path_or_text: str | os.PathLike, *, max_ops: int = DEFAULT_MAX_OPS) -> Circuit:
    """Read an OpenQASM 2.0 program into a :class:`~tnsim.circuit.Circuit`.

    Parameters
    ----------
    path_or_text : str or os.PathLike
        A path, or a string naming an existing file (and holding neither a newline
        nor ``OPENQASM``), is read as a file; any other string is the program text
        itself (reported as ``<text>`` in errors).
    max_ops : int
        Refuse programs that expand to more operations than this (default
        10,000,000).  Expansion is counted before it happens, so gate-definition
        "bombs" fail at once.

    Returns
    -------
    Circuit
        Qubit registers concatenated in declaration order; gate definitions expanded.

    Raises
    ------
    QasmError
        Any problem in the program, as ``file:line:column: what and what to do``.
    InputError
        A file that cannot be read, or an argument of the wrong type.

    Notes
    -----
    The accepted language, the qelib1.inc gate table and the tnsim extension
    for ``iswap``, ``ryy`` and ``fsim`` are described in :mod:`tnsim.qasm`.

    References
    ----------
    A. W. Cross, L. S. Bishop, J. A. Smolin, J. M. Gambetta, "Open Quantum Assembly
    Language", arXiv:1707.03429 (2017).

    Examples
    --------
    >>> c = read_qasm('''OPENQASM 2.0;
    ... include "qelib1.inc";
    ... qreg q[2];
    ... h q;                 // broadcast over the register
    ... cx q[0], q[1];
    ... rz(-pi/2^2) q[1];''')
    >>> [(op.name, op.qubits) for op in c.ops]
    [('h', (0,)), ('h', (1,)), ('cx', (0, 1)), ('rz', (1,))]
    >>> c.ops[-1].params
    (-0.7853981633974483,)
    """
    if isinstance(max_ops, bool) or not isinstance(max_ops, int) or max_ops < 0:
        raise InputError(f"max_ops must be a non-negative integer, got {max_ops!r}")
    if isinstance(path_or_text, os.PathLike) or (
        isinstance(path_or_text, str) and _names_file(path_or_text)
    ):
        path = Path(path_or_text)
        text, source, directory = _read_text(path), str(path_or_text), path.parent
    elif isinstance(path_or_text, str):
        if _looks_like_missing_file(path_or_text):
            raise InputError(
                f"no such file: '{path_or_text}' (and it is not OpenQASM text, which starts "
                "with 'OPENQASM 2.0;'); check the path"
            )
        text, source, directory = path_or_text, "<text>", None
    else:
        raise InputError(
            f"read_qasm takes OpenQASM text or a file path, got {type(path_or_text).__name__}"
        )
    program = _Program(source, max_ops)
    eof = _Parser(text, source, directory, program).parse(main=True)
    return program.circuit(eof, source)


def _format_op(index: int, op: Operation) -> str:
    if op.custom is not None:
        raise InputError(
            f"operation {index} ('{op.name}' on qubits {op.qubits}) is a custom unitary; "
            "OpenQASM 2.0 cannot express an arbitrary matrix: replace it with named gates"
        )
    name = "U" if op.name == "u" else op.name
    if op.name not in QELIB1_GATES and op.name not in EXTENSION_DEFINITIONS:
        raise InputError(f"operation {index}: tnsim cannot write gate '{op.name}' as OpenQASM")
    params = ""
    if op.params:
        if not all(math.isfinite(p) for p in op.params):
            raise InputError(f"operation {index} ('{op.name}') has a non-finite parameter")
        params = "(" + ", ".join(repr(float(p)) for p in op.params) + ")"
    return f"{name}{params} " + ", ".join(f"q[{q}]" for q in op.qubits) + ";"


def write_qasm(circuit: Circuit) -> str:
    """Return ``circuit`` as OpenQASM 2.0 text that :func:`read_qasm` reads back exactly.

    One register ``q`` holds every qubit; parameters are written with ``repr``
    so they round-trip bit for bit.  ``iswap``, ``ryy`` and ``fsim`` get a
    ``gate`` definition in terms of qelib1 gates (:data:`EXTENSION_DEFINITIONS`).

    Parameters
    ----------
    circuit : Circuit
        The circuit; every operation must be a named gate.

    Returns
    -------
    str
        The program text, ending with a newline.

    Raises
    ------
    InputError
        The circuit holds a custom unitary (OpenQASM 2.0 cannot express one).

    Examples
    --------
    >>> print(write_qasm(Circuit(2).h(0).cx(0, 1).rz(0.25, 1)), end="")
    OPENQASM 2.0;
    include "qelib1.inc";
    qreg q[2];
    h q[0];
    cx q[0], q[1];
    rz(0.25) q[1];
    """
    body = [_format_op(k, op) for k, op in enumerate(circuit.ops)]
    used = {op.name for op in circuit.ops}
    definitions = [text for name, text in EXTENSION_DEFINITIONS.items() if name in used]
    lines = ["OPENQASM 2.0;", 'include "qelib1.inc";', *definitions]
    lines.append(f"qreg q[{circuit.num_qubits}];")
    return "\n".join(lines + body) + "\n"
