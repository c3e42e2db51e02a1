"""Gate-parameter arithmetic: parse to postfix code, evaluate it safely (no ``eval``).

Numbers, ``pi``, ``+ - * / ^`` (``^`` is a right-associative power binding
tighter than unary minus, so ``-2^2 == -4``), parentheses and
``sin cos tan exp ln sqrt``.  Code is a tuple of ``(kind, value, where)``
steps, ``where`` being the ``(Source, offset)`` reported if the step fails.
"""

from __future__ import annotations

import math
from typing import Any

from tnsim.circuits.qasm.lexer import Source, describe
from tnsim.errors import QasmError

__all__ = [
    "FUNCTIONS",
    "MAX_EXPR_DEPTH",
    "Code",
    "MathError",
    "constant",
    "evaluate",
    "parse_expression",
]

MAX_EXPR_DEPTH = 100
"""Deepest allowed nesting of parentheses, unary signs and powers in an expression."""

FUNCTIONS = {
    "sin": math.sin,
    "cos": math.cos,
    "tan": math.tan,
    "exp": math.exp,
    "ln": math.log,
    "sqrt": math.sqrt,
}
NUM, ARG, NEG, BIN, FN = range(5)
_BINARY = {"+": (1, False), "-": (1, False), "*": (2, False), "/": (2, False), "^": (4, True)}
_UNARY_PREC = 3

Where = tuple[Source, int]
Instruction = tuple[int, Any, Where]
"""One postfix instruction: its kind (NUM, ARG, NEG, BIN, FN), then by kind a number, an
argument index, nothing, an operator or a function name, then where it was written."""
Code = tuple[Instruction, ...]


class MathError(Exception):
    """An expression that has no finite real value, with where it failed."""

    def __init__(self, message: str, where: Where):
        super().__init__(message)
        self.message, self.where = message, where

    def to_qasm_error(self, note: str = "") -> QasmError:
        """The error to report, at the failing step, with ``note`` appended."""
        source, offset = self.where
        return source.error(self.message + note, offset)


def _binary(op: str, a: float, b: float, where: Where) -> float:
    try:
        if op == "+":
            value = a + b
        elif op == "-":
            value = a - b
        elif op == "*":
            value = a * b
        elif op == "/":
            if b == 0:
                raise MathError(f"division by zero ({a!r} / {b!r}); fix the divisor", where)
            value = a / b
        else:
            value = math.pow(a, b)
    except (OverflowError, ValueError):
        raise MathError(f"{a!r} {op} {b!r} is not a finite real number", where) from None
    if not math.isfinite(value):
        raise MathError(f"{a!r} {op} {b!r} overflows to {value!r}; use smaller values", where)
    return value


def _function(name: str, x: float, where: Where) -> float:
    try:
        value = FUNCTIONS[name](x)
    except (OverflowError, ValueError):
        raise MathError(f"{name}({x!r}) is not a finite real number", where) from None
    if not math.isfinite(value):
        raise MathError(f"{name}({x!r}) is not a finite real number", where)
    return value


def evaluate(code: Code, args: tuple[float, ...]) -> float:
    """Run postfix ``code`` with gate parameters ``args`` (iterative: no recursion).

    Examples
    --------
    >>> evaluate(((NUM, 2.0, None), (NUM, 3.0, None), (BIN, "^", None), (NEG, None, None)), ())
    -8.0
    """
    stack: list[float] = []
    for kind, value, where in code:
        if kind == NUM:
            stack.append(value)
        elif kind == ARG:
            stack.append(args[value])
        elif kind == NEG:
            stack[-1] = -stack[-1]
        elif kind == BIN:
            b = stack.pop()
            stack[-1] = _binary(value, stack[-1], b, where)
        else:
            stack[-1] = _function(value, stack[-1], where)
    return stack[0]


def constant(code: Code) -> float:
    """Value of parameter-free ``code``; a failure is a :class:`~tnsim.errors.QasmError`."""
    try:
        return evaluate(code, ())
    except MathError as exc:
        raise exc.to_qasm_error() from None


class _ExpressionParser:
    """Precedence climbing over the token stream of ``parser`` (see :func:`parse_expression`)."""

    def __init__(self, parser, env: dict[str, int] | None):
        self.p, self.env, self.depth = parser, env, 0
        self.code: list[Instruction] = []

    def where(self, tok) -> Where:
        return (self.p.source, tok.offset)

    def expr(self, min_prec: int) -> None:
        p = self.p
        self.depth += 1
        if self.depth > MAX_EXPR_DEPTH:
            raise p.error(f"expression nested deeper than {MAX_EXPR_DEPTH} levels; simplify it")
        self.unary()
        while p.tok.kind == "sym" and p.tok.text in _BINARY:
            prec, right_assoc = _BINARY[p.tok.text]
            if prec < min_prec:
                break
            op = p.advance()
            self.expr(prec if right_assoc else prec + 1)
            self.code.append((BIN, op.text, self.where(op)))
        self.depth -= 1

    def unary(self) -> None:
        p = self.p
        if p.at("-") or p.at("+"):
            op = p.advance()
            self.expr(_UNARY_PREC)
            if op.text == "-":
                self.code.append((NEG, None, self.where(op)))
            return
        self.primary()

    def primary(self) -> None:
        p = self.p
        tok = p.tok
        if tok.kind in ("int", "real"):
            p.advance()
            value = float(tok.text)
            if not math.isfinite(value):
                raise p.error(f"number {tok.text[:20]}... is too large", tok)
            self.code.append((NUM, value, self.where(tok)))
        elif tok.kind == "id":
            self.name(tok)
        elif p.at("("):
            p.advance()
            self.expr(0)
            p.expect(")", "to close the parenthesis")
        else:
            raise p.error(
                f"expected a number, 'pi', a parameter, a function or '(' in the expression, "
                f"found {describe(tok)}"
            )

    def name(self, tok) -> None:
        p, env = self.p, self.env
        p.advance()
        if tok.text == "pi":
            self.code.append((NUM, math.pi, self.where(tok)))
        elif tok.text in FUNCTIONS:
            p.expect("(", f"after the function '{tok.text}'")
            self.expr(0)
            p.expect(")", f"to close the argument of '{tok.text}'")
            self.code.append((FN, tok.text, self.where(tok)))
        elif env is not None and tok.text in env:
            self.code.append((ARG, env[tok.text], self.where(tok)))
        elif env is None:
            raise p.error(
                f"unknown name '{tok.text}' in an expression; use numbers, pi, + - * / ^, "
                "parentheses and sin cos tan exp ln sqrt",
                tok,
            )
        else:
            known = ", ".join(env) or "none"
            raise p.error(f"unknown parameter '{tok.text}' (the gate's parameters: {known})", tok)


def parse_expression(parser, env: dict[str, int] | None) -> Code:
    """Parse one expression from ``parser``'s tokens into postfix code.

    ``parser`` offers ``tok``, ``source``, ``advance()``, ``at(text)``,
    ``expect(text, context)`` and ``error(message, tok=None)``; ``env`` maps the
    enclosing gate's parameter names to their positions (``None`` at top level).
    """
    state = _ExpressionParser(parser, env)
    state.expr(0)
    return tuple(state.code)
