"""Declarations: qubits and bits (both styles), ``const`` values and ``input`` parameters.

``const`` and ``input`` values are bound while reading (inputs from the
``inputs`` mapping given to the reader) and substituted into every expression
that names them.  Their declared type is applied to the value:

* ``int[n]``/``uint[n]`` (or without width): an integer, checked against the width;
* ``float[64]`` (or ``float``): the value as it is; ``float[32]`` and ``float[16]``
  round it to that precision;
* ``angle`` (or ``angle[n]``): the value reduced into ``[0, 2π)``; with a width
  ``n`` it is then rounded to the nearest multiple of ``2π / 2**n`` (the fixed-point
  angle type of the specification, from memory).

Note that reducing an angle into ``[0, 2π)`` changes a rotation such as ``rz(θ)`` by
a global phase of ``-1`` when ``θ`` was outside it; declare ``float[64]`` to keep
the value as given.

An input without a value is refused, unless the reader keeps unbound inputs
(``read_qasm3(..., unbound="keep")``): then an input declared ``float[64]`` (or
``float``) becomes the named angle of the same name
(:func:`tnsim.circuits.parameters.angle`), and ``circuit.bind(values)`` later
gives exactly what reading with ``inputs=values`` gives.  Inputs of other types
stay refused without a value, since a real-valued name cannot honour their
type: an ``angle`` is reduced modulo ``2π`` (which changes a controlled rotation
by a relative phase) and rounded to its width, ``float[32]`` is rounded, an
``int`` is whole.  A ``const`` computed from a kept input is a named angle too,
when declared ``float[64]``.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

from tnsim.circuits.circuit import MAX_QUBITS
from tnsim.circuits.parameters import AngleExpr, angle
from tnsim.circuits.qasm.lexer import Token, describe
from tnsim.circuits.qasm3.gatedef import DefinitionParser
from tnsim.circuits.qasm3.program import Register
from tnsim.errors import InputError

__all__ = ["DeclarationParser", "convert"]

_TYPES = ("int", "uint", "float", "angle")
_REFUSED_TYPES = {
    "bool": "boolean values",
    "bit": "bit values",
    "complex": "complex numbers",
    "duration": "durations (timing)",
    "stretch": "stretches (timing)",
    "array": "classical arrays",
    "qubit": "qubit references",
}


def convert(kind: str, width: int | None, value, what: str):
    """Apply a declared type to a value; raise ``ValueError`` with the reason if it does not fit.

    Examples
    --------
    >>> convert("angle", None, -math.pi / 2, "x") == 1.5 * math.pi
    True
    >>> convert("angle", 2, 1.0, "x") == math.pi / 2
    True
    >>> convert("uint", 8, 255.0, "n")
    255
    """
    if isinstance(value, AngleExpr):
        if kind == "float" and width in (None, 64):
            return value
        shown = kind if width is None else f"{kind}[{width}]"
        raise ValueError(
            f"{what} is declared {shown} but its value {value} depends on the unbound "
            f"input(s) {', '.join(value.names)}; declare it float[64], or give the input(s) "
            "a value (--input NAME=VALUE)"
        )
    if kind in ("int", "uint"):
        if isinstance(value, float):
            if not value.is_integer():
                raise ValueError(f"{what} is declared {kind} but its value {value!r} is not whole")
            value = int(value)
        low = 0 if kind == "uint" else -(1 << 63)
        high = 1 << 64 if kind == "uint" else 1 << 63
        if width is not None:
            low = 0 if kind == "uint" else -(1 << (width - 1))
            high = 1 << width if kind == "uint" else 1 << (width - 1)
        if not low <= value < high:
            name = kind if width is None else f"{kind}[{width}]"
            raise ValueError(f"{what} = {value} does not fit the type {name}")
        return value
    value = float(value)
    if kind == "float":
        if width == 32:
            value = float(np.float32(value))
        elif width == 16:
            value = float(np.float16(value))
        if not math.isfinite(value):
            raise ValueError(f"{what} overflows the type float[{width}]")
        return value
    turn = 2 * math.pi
    value = math.fmod(value, turn)
    if value < 0:
        value += turn
    if value >= turn:  # -tiny + 2π rounds up to 2π
        value = 0.0
    if width is not None:
        steps = 1 << width
        k = round(value / turn * steps) % steps
        value = turn * k / steps
    return value


class DeclarationParser(DefinitionParser):
    """Adds qubit and bit registers (``qubit[n] q;``, ``qreg q[n];``), ``const`` and ``input``."""

    def quantum_declaration(self, word: str) -> None:
        """Parse ``qubit[n] q;``, ``qubit q;`` or ``qreg q[n];``."""
        name = self.declaration(word, quantum=True)
        self.expect(";", f"after the declaration of '{name.text}'")

    def classical_declaration(self, word: str):
        """Parse ``bit[n] c;``, ``bit c;`` or ``creg c[n];``; return the name token."""
        return self.declaration(word, quantum=False)

    def declaration(self, word: str, *, quantum: bool) -> Token:
        """Parse a register declaration of either style; return the register's name token."""
        self.advance()
        size, scalar = 1, True
        if word in ("qubit", "bit") and self.at("["):
            self.advance()
            size, _ = self.constant_int("the register size", 1)
            self.expect("]", "after the register size")
            scalar = False
        name = self.expect_id(f"a {'qubit' if quantum else 'bit'} register name")
        self.new_name(name, "register")
        if word in ("qreg", "creg"):
            self.expect("[", f"after the register name '{name.text}'")
            size, _ = self.constant_int("the register size", 1)
            self.expect("]", "after the register size")
            scalar = False
        if quantum and self.program.num_qubits + size > MAX_QUBITS:
            raise self.error(
                f"register '{name.text}' of {size:,} qubits makes "
                f"{self.program.num_qubits + size:,} qubits in all; tnsim handles at most "
                f"{MAX_QUBITS:,} (every qubit needs a tensor)",
                name,
            )
        if quantum:
            if self.program.hardware >= 0:
                raise self.error(
                    "this program already uses hardware qubits ($n); declare qubits or use "
                    "hardware qubits, not both",
                    name,
                )
            self.program.qregs[name.text] = Register(self.program.num_qubits, size, scalar)
            self.program.num_qubits += size
            self.program.kinds[name.text] = "qubit register"
        else:
            self.program.cregs[name.text] = Register(self.program.num_clbits, size, scalar)
            self.program.num_clbits += size
            self.program.kinds[name.text] = "bit register"
        return name

    def scalar_type(self) -> tuple[str, int | None, Token]:
        """Parse ``int``, ``uint[n]``, ``float[64]``, ``angle`` ...; return kind, width, token."""
        tok = self.tok
        if tok.kind != "id" or tok.text not in _TYPES:
            if tok.kind == "id" and tok.text in _REFUSED_TYPES:
                raise self.refuse(tok, f"constants and inputs of {_REFUSED_TYPES[tok.text]}")
            raise self.error(
                f"expected a type (int, uint, float or angle, with an optional [width]), found "
                f"{describe(tok)}"
            )
        self.advance()
        width = None
        if self.at("["):
            self.advance()
            width, width_tok = self.constant_int(f"the width of {tok.text}", 1)
            self.expect("]", f"after the width of {tok.text}")
            if tok.text == "float" and width not in (16, 32, 64):
                raise self.error(
                    f"float[{width}]: tnsim reads float[16], float[32] and float[64]", width_tok
                )
            if tok.text in ("int", "uint", "angle") and width > 64:
                raise self.error(f"{tok.text}[{width}]: tnsim reads widths up to 64", width_tok)
        return tok.text, width, tok

    def const_declaration(self) -> None:
        """Parse ``const TYPE name = expression;`` and bind the value."""
        self.advance()
        kind, width, _ = self.scalar_type()
        name = self.expect_id("the constant's name")
        self.new_name(name, "constant")
        self.expect("=", f"after the name of the constant '{name.text}'")
        start = self.tok
        value = self.value(self.expression(), {})
        self.expect(";", f"after the value of '{name.text}'")
        self.bind(name, kind, width, value, start, "constant")

    def input_declaration(self) -> None:
        """Parse ``input TYPE name;`` and bind the value given for it."""
        self.advance()
        kind, width, _ = self.scalar_type()
        name = self.expect_id("the input's name")
        self.new_name(name, "input")
        self.expect(";", f"after the input '{name.text}'")
        inputs = self.program.inputs
        if name.text not in inputs:
            return self.keep_unbound(name, kind, width)
        value = inputs[name.text]
        if isinstance(value, bool) or not isinstance(value, numbers.Real):
            raise InputError(f"input '{name.text}' must be a real number, got {value!r}")
        if not math.isfinite(float(value)):
            raise InputError(f"input '{name.text}' must be finite, got {value!r}")
        value = int(value) if isinstance(value, numbers.Integral) else float(value)
        self.program.used_inputs.add(name.text)
        self.bind(name, kind, width, value, name, "input")

    def keep_unbound(self, name: Token, kind: str, width: int | None) -> None:
        """An input without a value: a named angle if the reader keeps them, else refused."""
        text = name.text
        give = (
            f"give it a value: --input {text}=VALUE on the command line, inputs={{'{text}': ...}}"
        )
        if not self.program.keep_unbound:
            raise self.error(
                f"input '{text}' has no value; {give} in Python, or read the file with "
                "unbound='keep' to keep it as a named angle (tnsim optimize does)",
                name,
            )
        if kind != "float" or width not in (None, 64):
            shown = kind if width is None else f"{kind}[{width}]"
            raise self.error(
                f"input '{text}' has no value and is declared {shown}: tnsim keeps only inputs "
                f"declared float[64] as named angles (an angle is reduced modulo 2π and rounded, "
                f"a float[32] rounded, an int whole, which a real-valued name cannot honour); "
                f"declare it 'input float[64] {text};' or {give}",
                name,
            )
        try:
            value = angle(text)
        except InputError:
            raise self.error(
                f"input '{text}' has no value and its name cannot name an angle (letters A-Z, "
                f"a-z, digits and '_' only); rename it, or {give}",
                name,
            ) from None
        self.program.constants[text] = value
        self.program.kinds[text] = "input"
        self.program.unbound.append(text)

    def bind(self, name: Token, kind: str, width, value, where: Token, what: str) -> None:
        """Record a constant or input with its declared type applied."""
        try:
            value = convert(kind, width, value, f"{what} '{name.text}'")
        except ValueError as exc:
            raise self.error(str(exc), where) from None
        self.program.constants[name.text] = value
        self.program.kinds[name.text] = what
