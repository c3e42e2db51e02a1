"""The OpenQASM 3 reader: program structure, includes, and :func:`read_qasm3`.

A recursive-descent parser (token helpers in :mod:`~tnsim.circuits.qasm3.parser`,
gate definitions in :mod:`~tnsim.circuits.qasm3.gatedef`, declarations in
:mod:`~tnsim.circuits.qasm3.declarations`, statements in
:mod:`~tnsim.circuits.qasm3.statements`) turns each statement into a node
(:mod:`~tnsim.circuits.qasm3.nodes`) and runs it at once; a loop body is kept
and run once per iteration.  Runs of simple gate statements in the main program
are read by :func:`~tnsim.circuits.qasm3.fast.read_simple_statements` without
tokens.  The accepted language is described in :mod:`tnsim.circuits.qasm3`.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path

from tnsim.circuits.circuit import Circuit
from tnsim.circuits.qasm.files import (
    MAX_INCLUDE_DEPTH,
    IncludesBeside,
    looks_like_missing_file,
    names_file,
    read_text,
)
from tnsim.circuits.qasm.lexer import Source, Token, describe
from tnsim.circuits.qasm3.expr import MathError, evaluate
from tnsim.circuits.qasm3.fast import read_simple_statements
from tnsim.circuits.qasm3.library import STDGATES
from tnsim.circuits.qasm3.program import Program
from tnsim.circuits.qasm3.statements import StatementParser
from tnsim.errors import InputError, QasmError

__all__ = [
    "DEFAULT_MAX_OPS",
    "MAX_INCLUDE_DEPTH",
    "STANDARD_INCLUDES",
    "UNBOUND_CHOICES",
    "check_unbound",
    "read_qasm3",
]

DEFAULT_MAX_OPS = 10_000_000
"""Default cap on the operations (and loop iterations) a program may expand to."""

STANDARD_INCLUDES = ("stdgates.inc",)
"""Includes served from tnsim's own tables; no file is read for them."""


UNBOUND_CHOICES = ("refuse", "keep")
"""What the reader may do with an ``input`` given no value: refuse it, or keep a named angle."""


def check_unbound(unbound) -> bool:
    """Whether ``unbound`` asks to keep inputs without a value (checked).

    Examples
    --------
    >>> check_unbound("refuse"), check_unbound("keep")
    (False, True)
    """
    if unbound not in UNBOUND_CHOICES:
        raise InputError(
            f"unbound must be 'refuse' (an input without a value is an error) or 'keep' (it "
            f"becomes a named angle), got {unbound!r}"
        )
    return unbound == "keep"


def _version_ok(text: str) -> bool:
    major, _, minor = text.partition(".")
    return major == "3" and (not minor or minor.isdigit())


class _Parser(IncludesBeside, StatementParser):
    """Recursive-descent parser for one file (or text) of a program."""

    BUILTIN = "stdgates.inc"

    def __init__(self, source: Source, directory: Path | None, program: Program):
        super().__init__(source, program)
        self.directory = directory
        self.param_cache: dict[str, tuple] = {}

    def parse(self, *, main: bool) -> Token:
        """Parse and run every statement; return the ``eof`` token."""
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

    def constant_params(self, start: int, end: int) -> tuple | None:
        """Values of the parameter list ``text[start:end]`` (then ``)``), or ``None`` if wrong.

        Used by the fast path, which moves the lexer anywhere and reseeks it after.
        """
        self.lexer.seek(start)
        self.tok = self.lexer.next()
        try:
            codes = [self.expression()]
            while self.at(","):
                self.advance()
                codes.append(self.expression())
            if not self.at(")") or self.tok.offset != end:
                return None
            return tuple(evaluate(code, {}) for code in codes)
        except (QasmError, MathError):
            return None

    def header(self, *, required: bool) -> None:
        """Read ``OPENQASM 3.0;`` (or ``OPENQASM 3;``)."""
        if not self.at("OPENQASM"):
            if required:
                raise self.error(
                    "missing header: an OpenQASM 3 program starts with 'OPENQASM 3.0;'"
                )
            return
        self.advance()
        version = self.tok
        if version.kind not in ("int", "real"):
            raise self.error(f"expected the version 3.0 after OPENQASM, found {describe(version)}")
        self.advance()
        if not _version_ok(version.text):
            raise self.error(
                f"unsupported OpenQASM version {version.text} for the OpenQASM 3 reader; "
                "tnsim reads OpenQASM 2.0 and 3",
                version,
            )
        self.expect(";", "after the OPENQASM header")

    def statement(self, main: bool) -> None:
        """Parse one statement and run it."""
        tok = self.tok
        word = tok.text if tok.kind == "id" else None
        if word == "include":
            return self.include()
        if word == "gate":
            return self.gate_definition()
        if word == "const":
            return self.const_declaration()
        if word == "OPENQASM":
            raise self.error("the OPENQASM header may appear only once, at the very start")
        if not main:
            raise self.error(
                "an included file may hold only gate definitions, constants and includes, "
                f"found {describe(tok)}; move it into the main program"
            )
        if word in ("qubit", "qreg"):
            return self.quantum_declaration(word)
        if word in ("bit", "creg"):
            return self.bit_declaration(word)
        if word == "input":
            return self.input_declaration()
        if tok.kind == "sym" and tok.text == "{":
            raise self.refuse(tok, "scope blocks outside loops")
        node = self.quantum_statement({})
        if node is None:
            raise self.error(f"expected a statement, found {describe(tok)}")
        node.run(self.program, {})

    def bit_declaration(self, word: str) -> None:
        """``bit[n] c;`` (or ``creg c[n];``), optionally ``= measure q;``."""
        name = self.classical_declaration(word)
        if self.at("="):
            raise self.refuse(
                self.tok, "initialised bit declarations (declare the bits, then 'c = measure q;')"
            )
        self.expect(";", f"after the declaration of '{name.text}'")

    def include(self) -> None:
        """Read ``include "stdgates.inc";`` from the built-in table, other files beside the file."""
        self.advance()
        name_tok = self.tok
        if name_tok.kind != "string":
            raise self.error(f"expected a file name in quotes, found {describe(name_tok)}")
        self.advance()
        self.expect(";", "after the include")
        filename = name_tok.text[1:-1]
        if filename == "stdgates.inc":
            self.include_stdgates(name_tok)
        elif filename == "qelib1.inc":
            raise self.error(
                "qelib1.inc is the OpenQASM 2.0 library; an OpenQASM 3 program includes "
                '"stdgates.inc"',
                name_tok,
            )
        else:
            self.include_file(filename, name_tok)

    def include_stdgates(self, tok: Token) -> None:
        """Define every gate of stdgates.inc (refused if any name is taken)."""
        for name, gate in STDGATES.items():
            if name in self.program.kinds:
                raise self.error(
                    f"stdgates.inc defines gate '{name}', already declared as a "
                    f"{self.program.kinds[name]}; include stdgates.inc once, before your own "
                    "declarations",
                    tok,
                )
            self.program.gates[name] = gate
            self.program.kinds[name] = "gate (stdgates.inc)"


def read_qasm3(
    path_or_text: str | os.PathLike,
    *,
    inputs: Mapping[str, float] | None = None,
    unbound: str = "refuse",
    max_ops: int = DEFAULT_MAX_OPS,
    name: str | None = None,
) -> Circuit:
    """Read an OpenQASM 3 program into a :class:`~tnsim.circuits.circuit.Circuit`.

    Parameters
    ----------
    path_or_text : str or os.PathLike
        A path, or a string naming an existing file (and holding neither a newline
        nor ``OPENQASM``), is read as a file; any other string is the program text
        itself (reported as ``<text>`` in errors).
    inputs : mapping of str to float, optional
        Values of the program's ``input`` declarations, bound while reading.
    unbound : {"refuse", "keep"}
        What to do with an input given no value in ``inputs``.  ``"refuse"``
        (the default): a :class:`QasmError` at its declaration, so a circuit read
        for a query is always numeric and a forgotten value is reported where it
        is declared.  ``"keep"``: an input declared ``float[64]`` (or ``float``)
        becomes the named angle of the same name
        (:mod:`tnsim.circuits.parameters`), to optimize or to bind later with
        :meth:`Circuit.bind`; ``circuit.bind(v)`` equals reading with
        ``inputs=v``.  Such an input may be added, subtracted, negated, and
        multiplied or divided by numbers, in the program and in gate
        definitions; anything else (``sin(theta)``, ``theta * theta``, a loop
        bound, a ``gphase`` left uncontrolled, a ``ctrl @`` that needs a matrix)
        is refused at its position.
    max_ops : int
        Refuse programs that expand to more operations (or run more loop
        iterations) than this (default 10,000,000).  Sizes are bounded before
        anything is expanded, so definition "bombs" and huge loops fail at once.
    name : str, optional
        How errors name program text (default ``<text>``), e.g. ``<stdin>``.

    Returns
    -------
    Circuit
        Qubit registers concatenated in declaration order (or hardware qubits
        ``$0 .. $n``); gate definitions, modifiers and loops expanded; a global
        phase, if any, as one custom operation ``gphase`` on qubit 0; the
        measurements in :attr:`Circuit.measurements` (bit registers concatenated
        in declaration order).

    Raises
    ------
    QasmError
        Any problem in the program, or a construct tnsim does not read, as
        ``file:line:column: what and what to do``.
    InputError
        A file that cannot be read, an argument of the wrong type, or ``inputs``
        naming values the program does not declare.

    References
    ----------
    A. W. Cross et al., "OpenQASM 3: A broader and deeper quantum assembly language",
    ACM Transactions on Quantum Computing 3, 12 (2022).

    Examples
    --------
    >>> c = read_qasm3('''OPENQASM 3.0;
    ... include "stdgates.inc";
    ... input angle[32] theta;
    ... qubit[3] q;
    ... bit[3] c;
    ... h q[0];
    ... for int i in [0:1] { ctrl @ x q[i], q[i + 1]; }
    ... inv @ rz(theta) q[2];
    ... c = measure q;''', inputs={"theta": 0.5})
    >>> [(op.name, op.qubits) for op in c.ops]
    [('h', (0,)), ('cx', (0, 1)), ('cx', (1, 2)), ('rz', (2,))]
    >>> round(c.ops[-1].params[0], 6), c.measurements
    (-0.5, {0: 0, 1: 1, 2: 2})

    An input without a value kept as a named angle; binding it later equals
    reading with its value:

    >>> text = '''OPENQASM 3.0;
    ... include "stdgates.inc";
    ... input float[64] theta;
    ... gate half(a) q { rx(a / 2) q; }
    ... qubit[1] q;
    ... inv @ half(2 * theta + pi) q[0];'''
    >>> v = read_qasm3(text, unbound="keep")
    >>> v.parameters(), str(v.ops[0].params[0])
    (('theta',), '-theta - 1.5707963267948966')
    >>> v.bind({"theta": 0.5}).ops == read_qasm3(text, inputs={"theta": 0.5}).ops
    True
    """
    if isinstance(max_ops, bool) or not isinstance(max_ops, int) or max_ops < 0:
        raise InputError(f"max_ops must be a non-negative integer, got {max_ops!r}")
    values = dict(inputs or {})
    if not all(isinstance(k, str) for k in values):
        raise InputError("inputs must map input names (str) to numbers")
    keep = check_unbound(unbound)
    source, directory = _source(path_or_text, name)
    program = Program(max_ops, values, keep_unbound=keep)
    eof = _Parser(source, directory, program).parse(main=True)
    unused = sorted(set(values) - program.used_inputs)
    if unused:
        declared = sorted(program.used_inputs | set(program.unbound)) or ["none"]
        raise InputError(
            f"inputs {unused} are not declared by the program (its inputs: "
            f"{', '.join(declared)}); check the names"
        )
    if not program.qregs and program.hardware < 0:
        raise source.error("the program declares no qubit; add one, e.g. 'qubit[2] q;'", eof.offset)
    return program.circuit()


def _source(path_or_text, name: str | None = None) -> tuple[Source, Path | None]:
    """The source to read and the folder its includes come from (``None`` for text)."""
    if isinstance(path_or_text, os.PathLike) or (
        isinstance(path_or_text, str) and names_file(path_or_text)
    ):
        path = Path(path_or_text)
        return Source(read_text(path), str(path_or_text)), path.parent
    if isinstance(path_or_text, str):
        if looks_like_missing_file(path_or_text):
            raise InputError(
                f"no such file: '{path_or_text}' (and it is not OpenQASM text, which starts "
                "with 'OPENQASM 3.0;'); check the path"
            )
        return Source(path_or_text.removeprefix("\ufeff"), name or "<text>"), None
    raise InputError(
        f"read_qasm3 takes OpenQASM text or a file path, got {type(path_or_text).__name__}"
    )
