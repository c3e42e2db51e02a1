"""Classical expressions of OpenQASM 3 programs: parsed to postfix code, evaluated safely.

What is read: integer and real literals, the constants ``pi``/``π``,
``tau``/``τ`` and ``euler``/``ℇ``, names of constants, inputs, loop variables
and gate parameters, ``+ - * / % **`` (``**`` is a right-associative power that
binds tighter than unary minus, so ``-2**2 == -4``), parentheses, and the
functions ``sin cos tan arcsin arccos arctan exp log sqrt floor ceiling mod pow``
(the specification's built-in math functions, from memory).

Values are Python ``int`` or ``float``: ``+ - * % **`` of integers stay integers
(refused beyond 64 bits), ``/`` is always real division, ``floor`` and
``ceiling`` give integers.  ``%`` and ``mod`` are read for non-negative
operands only (the sign convention for negative ones is not settled here).
Comparisons, logic and bit operators, casts, booleans and complex numbers are
classical computation and are refused with their position.  Nothing is passed
to Python's ``eval``; evaluation runs a stack machine, so long sums cannot
exhaust the recursion limit.  Names of constants and inputs are replaced by
their values while parsing; the code keeps only loop variables and gate
parameters by name.

An input read without a value (``read_qasm3(..., unbound="keep")``) is a named
angle, an :class:`~tnsim.circuits.parameters.AngleExpr`.  It may go through
``+``, ``-``, unary ``-``, and ``*`` and ``/`` by numbers, which keep it affine;
any other operation on it (``theta * theta``, ``theta ** 2``, ``%``, a function
such as ``sin(theta)``) raises a :class:`MathError` naming the construct, and so
does its use where a number is needed (:func:`needs_number`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm.arith import MAX_EXPR_DEPTH
from tnsim.circuits.qasm.lexer import describe
from tnsim.errors import InputError, QasmError

__all__ = [
    "CONSTANTS",
    "FUNCTIONS",
    "Code",
    "MathError",
    "evaluate",
    "give_values",
    "is_constant",
    "needs_number",
    "not_affine",
    "parse_expression",
]

NUM, NAME, NEG, BIN, FN = range(5)
Step = tuple[int, Any, int]
Code = tuple[Step, ...]
"""Postfix steps ``(kind, value, offset)``; ``offset`` locates the step for errors."""

INT_LIMIT = 1 << 63
"""Integers of at least this magnitude are refused (the language's widest integer type)."""

CONSTANTS = {
    "pi": math.pi,
    "π": math.pi,
    "tau": math.tau,
    "τ": math.tau,
    "euler": math.e,
    "ℇ": math.e,
}
"""Built-in constants of the language (from memory of the specification)."""


def _floor(x):
    return math.floor(x)


def _ceiling(x):
    return math.ceil(x)


def _mod(a, b):
    if a < 0 or b < 0:
        raise ValueError("negative operand")
    if b == 0:
        raise ZeroDivisionError
    return a % b if isinstance(a, int) and isinstance(b, int) else math.fmod(a, b)


def _pow(a, b):
    return _power(a, b)


FUNCTIONS: dict[str, tuple[int, Callable[..., Any]]] = {
    "sin": (1, math.sin),
    "cos": (1, math.cos),
    "tan": (1, math.tan),
    "arcsin": (1, math.asin),
    "arccos": (1, math.acos),
    "arctan": (1, math.atan),
    "exp": (1, math.exp),
    "log": (1, math.log),
    "sqrt": (1, math.sqrt),
    "floor": (1, _floor),
    "ceiling": (1, _ceiling),
    "mod": (2, _mod),
    "pow": (2, _pow),
}
"""Function name -> (number of arguments, implementation)."""

_BINARY = {"+": (1, False), "-": (1, False), "*": (2, False), "/": (2, False), "%": (2, False)}
_BINARY["**"] = (4, True)
_UNARY_PREC = 3
_REFUSED_OPERATORS = {
    "==": "a comparison",
    "!=": "a comparison",
    "<": "a comparison",
    ">": "a comparison",
    "<=": "a comparison",
    ">=": "a comparison",
    "&&": "a logical operator",
    "||": "a logical operator",
    "!": "a logical operator",
    "&": "a bit operator",
    "|": "a bit operator",
    "~": "a bit operator",
    "<<": "a bit shift",
    ">>": "a bit shift",
}
_CLASSICAL_WORDS = {
    "true": "a boolean literal",
    "false": "a boolean literal",
    "measure": "a measurement used as a value",
    "durationof": "a duration (timing)",
    "sizeof": "an array size query",
    "int": "a type cast",
    "uint": "a type cast",
    "float": "a type cast",
    "angle": "a type cast",
    "bool": "a type cast",
    "bit": "a type cast",
    "complex": "a type cast",
    "duration": "a type cast",
}


class MathError(Exception):
    """An expression without a finite value (or of the wrong kind), with its text offset."""

    def __init__(self, message: str, offset: int):
        super().__init__(message)
        self.message, self.offset = message, offset
        self.source: Any = None  # the Source of a gate body the step belongs to, once known


def _check_int(value: int, offset: int) -> int:
    if -INT_LIMIT < value < INT_LIMIT:
        return value
    raise MathError("integer overflow: the value needs more than 64 bits", offset)


def _power(a, b):
    if isinstance(a, int) and isinstance(b, int) and b >= 0:
        if abs(a) > 1 and b > 64:
            raise OverflowError
        return a**b
    return math.pow(a, b)


def _names(*values) -> list[str]:
    """The names the named angles among ``values`` depend on, sorted."""
    return sorted({n for v in values if isinstance(v, AngleExpr) for n in v.names})


def give_values(names: list[str]) -> str:
    """How to give ``names`` values, in Python and on the command line.

    Examples
    --------
    >>> give_values(["a"])
    "give it a value (inputs={'a': ...}; command line: --input a=VALUE)"
    """
    python = ", ".join(f"'{n}': ..." for n in names)
    line = " ".join(f"--input {n}=VALUE" for n in names)
    them = "it a value" if len(names) == 1 else "them values"
    return f"give {them} (inputs={{{python}}}; command line: {line})"


def _inputs(names: list[str]) -> str:
    return f"input{'s' if len(names) > 1 else ''} {', '.join(names)}"


def _shown(value) -> str:
    if not isinstance(value, AngleExpr):
        return repr(value)
    return str(value) if value.offset == 0 and value.terms[0][1] == 1 else f"({value})"


def not_affine(construct: str, *values) -> str:
    """Why ``construct`` of named angles is refused, and what to do.

    Examples
    --------
    >>> from tnsim.circuits.parameters import angle
    >>> not_affine("sin(theta)", angle("theta"))[:60]
    'sin(theta) is not an affine expression of the unbound input '
    """
    names = _names(*values)
    return (
        f"{construct} is not an affine expression of the unbound {_inputs(names)}: an input "
        "kept as a named angle may only be added, subtracted, negated, or multiplied and "
        f"divided by numbers; {give_values(names)}"
    )


def needs_number(what: str, value) -> str:
    """Why a named angle cannot be used where ``what`` needs a number, and what to do.

    Examples
    --------
    >>> from tnsim.circuits.parameters import angle
    >>> needs_number("a loop bound", 2 * angle("n"))[:69]
    'a loop bound must be a number known while reading, but 2*n depends on'
    >>> needs_number("an index", angle("n"))[:70]
    'an index must be a number known while reading, but the input n has no '
    """
    names = _names(value)
    if value.offset == 0 and value.terms == ((names[0], 1.0),):
        why = f"the input {names[0]} has no value"
    else:
        why = f"{value} depends on the unbound {_inputs(names)}"
    return f"{what} must be a number known while reading, but {why}; {give_values(names)}"


def _symbolic_binary(op: str, a, b, offset: int):
    """``a op b`` where one operand is a named angle: affine results only."""
    both = isinstance(a, AngleExpr) and isinstance(b, AngleExpr)
    construct = f"{_shown(a)} {op} {_shown(b)}"
    try:
        if op == "+":
            value = a + b
        elif op == "-":
            value = a - b
        elif op == "*" and not both:
            value = a * b
        elif op == "/" and not isinstance(b, AngleExpr):
            if b == 0:
                raise MathError(f"division by zero ({construct}); fix the divisor", offset)
            value = a / b
        else:
            raise MathError(not_affine(construct, a, b), offset)
    except InputError as exc:
        raise MathError(f"{construct}: {exc}", offset) from None
    if isinstance(value, float) and not math.isfinite(value):
        raise MathError(f"{construct} is not a finite real number", offset)
    return value


def _binary(op: str, a, b, offset: int):
    if type(a) is AngleExpr or type(b) is AngleExpr:
        return _symbolic_binary(op, a, b, offset)
    try:
        if op == "+":
            value = a + b
        elif op == "-":
            value = a - b
        elif op == "*":
            value = a * b
        elif op == "/":
            if b == 0:
                raise MathError(f"division by zero ({a!r} / {b!r}); fix the divisor", offset)
            value = a / b
        elif op == "%":
            value = _mod(a, b)
        else:
            value = _power(a, b)
    except ZeroDivisionError:
        raise MathError(f"{a!r} % {b!r}: remainder of a division by zero", offset) from None
    except ValueError:
        if op == "%":
            raise MathError(
                f"{a!r} % {b!r}: tnsim reads % for non-negative operands only", offset
            ) from None
        raise MathError(f"{a!r} {op} {b!r} is not a finite real number", offset) from None
    except OverflowError:
        raise MathError(f"{a!r} {op} {b!r} is not a finite real number", offset) from None
    if isinstance(value, int):
        return _check_int(value, offset)
    if not math.isfinite(value):
        raise MathError(f"{a!r} {op} {b!r} overflows to {value!r}; use smaller values", offset)
    return value


def _call(name: str, args: list, offset: int):
    if any(type(a) is AngleExpr for a in args):
        shown = ", ".join(str(a) if isinstance(a, AngleExpr) else repr(a) for a in args)
        raise MathError(not_affine(f"{name}({shown})", *args), offset)
    try:
        value = FUNCTIONS[name][1](*args)
    except ZeroDivisionError:
        raise MathError(f"{name}{tuple(args)!r}: division by zero", offset) from None
    except (OverflowError, ValueError):
        shown = ", ".join(map(repr, args))
        raise MathError(f"{name}({shown}) is not a finite real number", offset) from None
    if isinstance(value, int):
        return _check_int(value, offset)
    if not math.isfinite(value):
        raise MathError(f"{name}({', '.join(map(repr, args))}) is not a finite number", offset)
    return value


def evaluate(code: Code, env: Any):
    """Run postfix ``code`` with the variables in ``env``; return an ``int`` or ``float``.

    ``env`` maps each name step's key to its value (a dict, or a tuple of gate
    parameters indexed by position).

    Raises :class:`MathError` (with the failing step's offset) for a value that is
    not a finite number.

    Examples
    --------
    >>> evaluate(((NUM, 2, 0), (NUM, 3, 0), (BIN, "**", 0), (NEG, None, 0)), {})
    -8
    >>> evaluate(((NAME, "t", 0), (NUM, 2, 0), (BIN, "/", 0)), {"t": 1})
    0.5
    """
    stack: list = []
    for kind, value, offset in code:
        if kind == NUM:
            stack.append(value)
        elif kind == NAME:
            stack.append(env[value])
        elif kind == NEG:
            stack[-1] = -stack[-1]
        elif kind == BIN:
            b = stack.pop()
            stack[-1] = _binary(value, stack[-1], b, offset)
        else:
            count = FUNCTIONS[value][0]
            args = stack[-count:]
            del stack[-count:]
            stack.append(_call(value, args, offset))
    return stack[0]


def is_constant(code: Code) -> bool:
    """Whether ``code`` names no variable (its value is known while parsing)."""
    return all(kind != NAME for kind, _, _ in code)


def int_literal(text: str) -> int:
    """Value of an integer literal (decimal, ``0x``, ``0o`` or ``0b``, ``_`` separators).

    Examples
    --------
    >>> int_literal("0x1_F"), int_literal("0b101"), int_literal("1_000")
    (31, 5, 1000)
    """
    digits = text.replace("_", "")
    base = {"x": 16, "o": 8, "b": 2}.get(digits[1:2].lower(), 10) if len(digits) > 1 else 10
    if base != 10:
        digits = digits[2:]
    if not digits or len(digits) > 70:
        raise ValueError(text)
    return int(digits, base)


class _ExpressionParser:
    """Precedence climbing over the tokens of ``parser`` (see :func:`parse_expression`)."""

    def __init__(self, parser, variables: dict[str, str]):
        self.p, self.variables, self.depth = parser, variables, 0
        self.code: list[Step] = []

    def expr(self, min_prec: int) -> None:
        p = self.p
        self.depth += 1
        if self.depth > MAX_EXPR_DEPTH:
            raise p.error(f"expression nested deeper than {MAX_EXPR_DEPTH} levels; simplify it")
        self.unary()
        while p.tok.kind == "sym":
            text = p.tok.text
            if text not in _BINARY:
                self.refuse_operator()
                break
            prec, right_assoc = _BINARY[text]
            if prec < min_prec:
                break
            op = p.advance()
            self.expr(prec if right_assoc else prec + 1)
            self.code.append((BIN, op.text, op.offset))
        self.depth -= 1

    def refuse_operator(self) -> None:
        p = self.p
        text = p.tok.text
        if text == "^":
            raise p.error("'^' is bitwise XOR in OpenQASM 3; write '**' for a power")
        what = _REFUSED_OPERATORS.get(text)
        if what is not None:
            raise p.error(
                f"'{text}' is {what}: classical computation is not supported; tnsim reads "
                "gate parameters and indices made of + - * / % ** and math functions"
            )
        if text.endswith("=") and text not in ("=",):
            raise p.error(f"'{text}' is a classical assignment, which is not supported")

    def unary(self) -> None:
        p = self.p
        if p.at("-") or p.at("+"):
            op = p.advance()
            self.expr(_UNARY_PREC)
            if op.text == "-":
                self.code.append((NEG, None, op.offset))
            return
        if p.tok.kind == "sym" and p.tok.text in ("!", "~"):
            self.refuse_operator()
        self.primary()

    def primary(self) -> None:
        p = self.p
        tok = p.tok
        value: int | float
        if tok.kind == "int":
            p.advance()
            try:
                value = int_literal(tok.text)
            except ValueError:
                raise p.error(f"malformed integer literal {describe(tok)}", tok) from None
            if value >= INT_LIMIT:
                raise p.error(f"integer {describe(tok)} needs more than 64 bits", tok)
            self.code.append((NUM, value, tok.offset))
        elif tok.kind == "real":
            p.advance()
            value = float(tok.text.replace("_", ""))
            if not math.isfinite(value):
                raise p.error(f"number {tok.text[:20]}... is too large", tok)
            self.code.append((NUM, value, tok.offset))
        elif tok.kind == "id":
            self.name(tok)
        elif p.at("("):
            p.advance()
            self.expr(0)
            p.expect(")", "to close the parenthesis")
        elif tok.kind == "imaginary":
            raise p.error(f"{describe(tok)} is a complex number; tnsim reads real parameters")
        elif tok.kind == "duration":
            raise p.error(f"{describe(tok)} is a duration: timing is not supported")
        else:
            raise p.error(
                "expected a number, a constant, a parameter, a function or '(' in the "
                f"expression, found {describe(tok)}"
            )

    def name(self, tok) -> None:
        p = self.p
        text = tok.text
        if text in CONSTANTS and text not in self.variables:
            p.advance()
            self.code.append((NUM, CONSTANTS[text], tok.offset))
        elif text in FUNCTIONS and text not in self.variables:
            self.function(tok)
        elif text in self.variables:
            p.advance()
            self.code.append((NAME, self.variables[text], tok.offset))
        elif text in p.constants:
            p.advance()
            self.code.append((NUM, p.constants[text], tok.offset))
        elif text in _CLASSICAL_WORDS:
            raise p.error(
                f"'{text}' here is {_CLASSICAL_WORDS[text]}: classical computation is not "
                "supported in tnsim's OpenQASM 3 subset",
                tok,
            )
        else:
            raise p.error(p.unknown_name_message(tok), tok)

    def function(self, tok) -> None:
        p = self.p
        p.advance()
        arity = FUNCTIONS[tok.text][0]
        p.expect("(", f"after the function '{tok.text}'")
        for k in range(arity):
            if k:
                p.expect(",", f"between the arguments of '{tok.text}' (it takes {arity})")
            self.expr(0)
        p.expect(")", f"to close the argument list of '{tok.text}' (it takes {arity})")
        self.code.append((FN, tok.text, tok.offset))


def parse_expression(parser, variables: dict[str, str] | None = None) -> Code:
    """Parse one expression from ``parser``'s tokens into postfix code.

    ``parser`` offers ``tok``, ``advance()``, ``at(text)``, ``expect(text, context)``,
    ``error(message, tok=None)``, ``constants`` (name -> value, substituted now) and
    ``unknown_name_message(tok)``; ``variables`` maps the names of loop variables or gate
    parameters in scope to the keys their values will have in the evaluation
    environment.
    """
    state = _ExpressionParser(parser, variables or {})
    state.expr(0)
    return tuple(state.code)


def to_qasm_error(exc: MathError, source, note: str = "") -> QasmError:
    """The error to report for ``exc`` in ``source``, with ``note`` appended."""
    return source.error(exc.message + note, exc.offset)
