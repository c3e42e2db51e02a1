"""The OpenQASM 2.0 reader: program structure, includes, and :func:`read_qasm`.

A recursive-descent parser over :class:`~tnsim.circuits.qasm.lexer.Lexer` tokens
(helpers in :mod:`~tnsim.circuits.qasm.parser`, gate definitions in
:mod:`~tnsim.circuits.qasm.gatedef`, other statements in :mod:`~tnsim.circuits.qasm.statements`);
runs of simple gate statements in the main program are read by
:func:`~tnsim.circuits.qasm.fast.read_simple_statements` without tokens.  The accepted
language is described in :mod:`tnsim.circuits.qasm`.
"""

from __future__ import annotations

import os
from pathlib import Path

from tnsim.circuits.circuit import Circuit
from tnsim.circuits.qasm.arith import constant, parse_expression
from tnsim.circuits.qasm.definitions import QELIB1
from tnsim.circuits.qasm.fast import read_simple_statements
from tnsim.circuits.qasm.files import (
    MAX_INCLUDE_DEPTH,
    IncludesBeside,
    looks_like_missing_file,
    names_file,
    read_text,
)
from tnsim.circuits.qasm.header import UNITARY_ONLY
from tnsim.circuits.qasm.lexer import Source, Token, describe
from tnsim.circuits.qasm.program import Program
from tnsim.circuits.qasm.statements import StatementParser
from tnsim.errors import InputError, QasmError

__all__ = ["DEFAULT_MAX_OPS", "MAX_INCLUDE_DEPTH", "read_qasm"]

DEFAULT_MAX_OPS = 10_000_000
"""Default cap on the number of operations a program may expand to."""


class _Parser(IncludesBeside, StatementParser):
    """Recursive-descent parser for one file (or text) of a program."""

    BUILTIN = "qelib1.inc"

    def __init__(self, source: Source, directory: Path | None, program: Program):
        super().__init__(source, program)
        self.directory = directory
        self.param_cache: dict[str, tuple[float, ...]] = {}

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
                f"unsupported OpenQASM version {version.text}; tnsim reads OpenQASM 2.0 and 3",
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


def read_qasm(
    path_or_text: str | os.PathLike, *, max_ops: int = DEFAULT_MAX_OPS, name: str | None = None
) -> Circuit:
    """Read an OpenQASM 2.0 program into a :class:`~tnsim.circuits.circuit.Circuit`.

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
    name : str, optional
        What messages call program text (default ``<text>``; e.g. ``<stdin>``).

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
    for ``iswap``, ``ryy`` and ``fsim`` are described in :mod:`tnsim.circuits.qasm`.

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
        source, directory = Source(path_or_text, name or "<text>"), None
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
