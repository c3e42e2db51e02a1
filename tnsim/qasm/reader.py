"""The OpenQASM 2.0 reader: statements, includes, declarations, gate definitions, calls.

A recursive-descent parser over :class:`~tnsim.qasm.lexer.Lexer` tokens; runs
of simple gate statements in the main program are read by
:func:`~tnsim.qasm.fast.read_simple_statements` without tokens.  The accepted
language is described in :mod:`tnsim.qasm`.
"""

from __future__ import annotations

import os
from pathlib import Path

from ..circuit import Circuit
from ..errors import InputError, QasmError
from .arith import Code, MathError, constant, parse_expression
from .definitions import (
    BUILTINS,
    EXTENSION_TOKENS,
    MAX_GATE_DEPTH,
    QELIB1,
    SIZE_CAP,
    Call,
    Gate,
    expand,
)
from .fast import read_simple_statements
from .files import looks_like_missing_file, names_file, read_text
from .header import EXTENSION_DEFINITIONS, KEYWORDS, QELIB1_GATES, RESERVED, UNITARY_ONLY
from .lexer import Lexer, Source, Token, describe
from .program import Arg, Program

__all__ = ["DEFAULT_MAX_OPS", "MAX_INCLUDE_DEPTH", "read_qasm"]

DEFAULT_MAX_OPS = 10_000_000
"""Default cap on the number of operations a program may expand to."""

MAX_INCLUDE_DEPTH = 8
"""Deepest allowed chain of included files."""


class _Parser:
    """Recursive-descent parser for one file (or text) of a program."""

    def __init__(self, source: Source, directory: Path | None, program: Program):
        self.source, self.directory, self.program = source, directory, program
        self.lexer = Lexer(source)
        self.tok = self.lexer.next()
        self.recording: list[tuple[str, str]] | None = None
        self.param_cache: dict[str, tuple[float, ...]] = {}

    # -- token helpers

    def advance(self) -> Token:
        tok = self.tok
        if self.recording is not None:
            self.recording.append((tok.kind, tok.text))
        if tok.kind != "eof":
            self.tok = self.lexer.next()
        return tok

    def error(self, message: str, tok: Token | None = None) -> QasmError:
        tok = self.tok if tok is None else tok
        return self.source.error(message, tok.offset)

    def at(self, text: str) -> bool:
        return self.tok.text == text and self.tok.kind in ("sym", "id")

    def expect(self, text: str, context: str = "") -> Token:
        if not self.at(text):
            hint = " (every statement ends with ';')" if text == ";" else ""
            where = f" {context}" if context else ""
            raise self.error(f"expected '{text}'{where}, found {describe(self.tok)}{hint}")
        return self.advance()

    def expect_id(self, what: str) -> Token:
        if self.tok.kind != "id":
            raise self.error(f"expected {what}, found {describe(self.tok)}")
        return self.advance()

    def expect_int(self, what: str) -> tuple[int, Token]:
        tok = self.tok
        if tok.kind != "int":
            raise self.error(f"expected {what} (a non-negative integer), found {describe(tok)}")
        self.advance()
        if len(tok.text) > 15:
            raise self.error(f"{what} {tok.text} is too large", tok)
        return int(tok.text), tok

    # -- program structure

    def parse(self, *, main: bool) -> Token:
        """Parse every statement; return the ``eof`` token."""
        self.header(required=main)
        while self.tok.kind != "eof":
            if main and self.tok.kind == "id" and self.simple_statements():
                continue
            self.statement(main)
        return self.tok

    def simple_statements(self) -> bool:
        """Read a run of simple gate statements by the fast path; whether any was read."""
        start = self.tok.offset
        end = read_simple_statements(
            self.source.text, start, self.program, self.constant_params, self.param_cache
        )
        self.lexer.seek(end)
        self.tok = self.lexer.next()
        return end != start

    def constant_params(self, start: int, end: int) -> tuple[float, ...] | None:
        """Values of the parameter list ``text[start:end]`` (then ``)``), or ``None`` if wrong.

        Used by the fast path, which moves the lexer anywhere and reseeks it after.
        """
        self.lexer.seek(start)
        self.tok = self.lexer.next()
        try:
            codes = [parse_expression(self, None)]
            while self.at(","):
                self.advance()
                codes.append(parse_expression(self, None))
            if not self.at(")") or self.tok.offset != end:
                return None
            return tuple(constant(code) for code in codes)
        except QasmError:
            return None

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
            raise self.error(f"expected the version 2.0 after OPENQASM, found {describe(version)}")
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
        if word in UNITARY_ONLY:
            raise self.unsupported(tok)
        if word == "include":
            return self.include()
        if word == "gate":
            return self.gate_definition()
        if word == "OPENQASM":
            raise self.error("the OPENQASM header may appear only once, at the very start")
        if not main:
            raise self.error(
                f"an included file may hold only gate definitions, found {describe(tok)}; "
                "move it into the main program"
            )
        if word in ("qreg", "creg"):
            return self.register(word)
        if word == "barrier":
            return self.barrier()
        if word == "measure":
            return self.measure()
        if word is None:
            raise self.error(f"expected a statement, found {describe(tok)}")
        return self.application()

    def unsupported(self, tok: Token) -> QasmError:
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
            raise self.error(f"expected a file name in double quotes, found {describe(name_tok)}")
        self.advance()
        self.expect(";", "after the include")
        filename = name_tok.text[1:-1]
        if filename == "qelib1.inc":
            self.include_qelib1(name_tok)
        else:
            self.include_file(filename, name_tok)

    def include_qelib1(self, tok: Token) -> None:
        for name, gate in QELIB1.items():
            if name in self.program.gates:
                raise self.error(
                    f"qelib1.inc defines gate '{name}', already defined by "
                    f"{self.program.gates[name].origin}; include qelib1.inc once, before your "
                    "own gate definitions",
                    tok,
                )
            self.program.gates[name] = gate

    def include_file(self, filename: str, tok: Token) -> None:
        path = self.resolve_include(filename, tok)
        key = os.path.abspath(path)
        if key in self.program.include_stack:
            raise self.error(f"'{filename}' includes itself (directly or indirectly)", tok)
        if len(self.program.include_stack) >= MAX_INCLUDE_DEPTH:
            raise self.error(f"includes nest deeper than {MAX_INCLUDE_DEPTH} files", tok)
        try:
            text = read_text(path)
        except InputError as exc:
            raise self.error(f"cannot include '{filename}': {exc}", tok) from None
        self.program.include_stack.append(key)
        _Parser(Source(text, str(path)), path.parent, self.program).parse(main=False)
        self.program.include_stack.pop()

    def resolve_include(self, filename: str, tok: Token) -> Path:
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

    def new_name(self, tok: Token, kind: str) -> None:
        if tok.text in RESERVED:
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

    def check_gate_name(self, name: Token) -> None:
        self.new_name(name, "gate")
        existing = self.program.gates.get(name.text)
        if existing is not None:
            raise self.error(
                f"gate '{name.text}' is already defined by {existing.origin}; choose another name",
                name,
            )

    def id_list(self, opener: str | None, closer: str, what: str) -> list[Token]:
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
        seen: set[str] = set()
        for tok in params + qargs:
            self.new_name(tok, "gate parameter or argument")
            if tok.text in seen:
                raise self.error(f"'{tok.text}' is listed twice in the gate's signature", tok)
            seen.add(tok.text)

    def gate_body(
        self, name: Token, brace: Token, params: list[Token], qargs: list[Token]
    ) -> list[Call]:
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

    def formal_args(self, formal: dict[str, int], owner: str) -> list[Token]:
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

    def make_gate(self, name: Token, n_params: int, n_qubits: int, body, tokens) -> Gate:
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

    # -- gate calls at the top level

    def lookup(self, tok: Token) -> Gate:
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
                    args[j].token if isinstance(args[j], Arg) else args[j],
                )

    def application(self) -> None:
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
        return f"qubit {self.program.qubit_name(qubit)}"

    def reserve(self, count: int, tok: Token) -> None:
        total = self.program.op_count + count
        if total > self.program.max_ops:
            raise self.error(
                f"the program expands to more than max_ops={self.program.max_ops} operations "
                f"(this statement adds {count}); raise max_ops if you mean it",
                tok,
            )
        self.program.op_count = total

    def broadcast_size(self, args: list[Arg]) -> int:
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
        args = [self.argument(quantum)]
        while self.at(","):
            self.advance()
            args.append(self.argument(quantum))
        return args

    def argument(self, quantum: bool) -> Arg:
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
        isinstance(path_or_text, str) and names_file(path_or_text)
    ):
        path = Path(path_or_text)
        source, directory = Source(read_text(path), str(path_or_text)), path.parent
    elif isinstance(path_or_text, str):
        if looks_like_missing_file(path_or_text):
            raise InputError(
                f"no such file: '{path_or_text}' (and it is not OpenQASM text, which starts "
                "with 'OPENQASM 2.0;'); check the path"
            )
        source, directory = Source(path_or_text, "<text>"), None
    else:
        raise InputError(
            f"read_qasm takes OpenQASM text or a file path, got {type(path_or_text).__name__}"
        )
    program = Program(max_ops)
    eof = _Parser(source, directory, program).parse(main=True)
    if not program.qregs:
        raise source.error(
            "the program declares no qubit register; add one, e.g. 'qreg q[2];'", eof.offset
        )
    return program.circuit()
