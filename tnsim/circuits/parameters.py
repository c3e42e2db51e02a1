"""Named gate angles: affine expressions of parameter names, such as ``2*gamma0 - 0.1``.

A gate angle of a variational circuit is a real number or an :class:`AngleExpr`:
``c_1 * name_1 + ... + c_k * name_k + offset`` with real coefficients.  Only
affine expressions are allowed, so the derivative of an angle with respect to a
name is a constant (the chain rule of :mod:`tnsim.queries.gradients` needs no
more).  Expressions are written as text (:func:`parse_angle`) or built with
Python arithmetic on :func:`angle` values::

    >>> from tnsim.circuits.parameters import angle, parse_angle
    >>> gamma = angle("gamma")
    >>> print(2 * gamma - 0.5 * angle("beta") + 0.1)
    -0.5*beta + 2*gamma + 0.1
    >>> parse_angle("-(beta - pi) / 2") == -0.5 * angle("beta") + 1.5707963267948966
    True
    >>> (2 * gamma + 1).value({"gamma": 0.25})
    1.5

Names are identifiers (a letter or ``_`` first, then letters, digits, ``_``);
``pi`` (or ``π``) is the constant.
"""

from __future__ import annotations

import functools
import math
import numbers
import re
import zlib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import NoReturn

from tnsim.errors import InputError

__all__ = ["AngleExpr", "angle", "as_angle", "parse_angle", "probe_values"]

_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")
_RESERVED = {"pi", "π"}


def _real(value, what: str) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise InputError(f"{what}: {value!r} is not a real number")
    out = float(value)
    if not math.isfinite(out):
        raise InputError(f"{what}: {value!r} is not a finite real number")
    return out


@dataclass(frozen=True)
class AngleExpr:
    """An affine expression of named angles: ``sum(coef * name) + offset``.

    Build one with :func:`angle`, :func:`parse_angle` or arithmetic
    (``+``, ``-``, multiplication and division by numbers).  Two expressions
    with the same terms and offset are equal and hash alike.

    Attributes
    ----------
    terms : tuple of (str, float)
        ``(name, coefficient)`` pairs, sorted by name, no zero coefficient.
    offset : float
        The constant part.
    """

    terms: tuple[tuple[str, float], ...]
    offset: float = 0.0

    @property
    def names(self) -> tuple[str, ...]:
        """The names the expression depends on, sorted."""
        return tuple(name for name, _ in self.terms)

    def coefficient(self, name: str) -> float:
        """The derivative of the expression with respect to ``name`` (0 if absent)."""
        return dict(self.terms).get(name, 0.0)

    def value(self, values: Mapping[str, float]) -> float:
        """The expression's value for ``values`` (every name must be given).

        Raises
        ------
        InputError
            If a name is missing.
        """
        total = self.offset
        for name, coef in self.terms:
            try:
                total += coef * values[name]
            except KeyError:
                raise InputError(
                    f"no value for parameter '{name}' (needed by the angle {self}); "
                    "give a value for every parameter"
                ) from None
        return float(total)

    def _combine(self, other, sign: float) -> AngleExpr | float:
        if isinstance(other, AngleExpr):
            table = dict(self.terms)
            for name, coef in other.terms:
                table[name] = table.get(name, 0.0) + sign * coef
            return _make(table.items(), self.offset + sign * other.offset)
        if isinstance(other, numbers.Real) and not isinstance(other, bool):
            return _make(self.terms, self.offset + sign * float(other))
        return NotImplemented

    def __add__(self, other):
        return self._combine(other, 1.0)

    __radd__ = __add__

    def __sub__(self, other):
        return self._combine(other, -1.0)

    def __rsub__(self, other):
        return (-self)._combine(other, 1.0)

    def __neg__(self) -> AngleExpr:
        return AngleExpr(tuple((n, -c) for n, c in self.terms), -self.offset + 0.0)

    def __pos__(self) -> AngleExpr:
        return self

    def _scaled(self, factor: float) -> AngleExpr | float:
        return _make(((n, c * factor) for n, c in self.terms), self.offset * factor)

    def __mul__(self, other):
        if isinstance(other, AngleExpr):
            raise InputError(
                f"({self}) * ({other}) is not affine; an angle may only be a sum of "
                "numbers times names plus a number"
            )
        if isinstance(other, numbers.Real) and not isinstance(other, bool):
            return self._scaled(_real(other, "angle factor"))
        return NotImplemented

    __rmul__ = __mul__

    def __truediv__(self, other):
        if isinstance(other, numbers.Real) and not isinstance(other, bool):
            if other == 0:
                raise InputError(f"({self}) / 0: division by zero")
            return self._scaled(1.0 / _real(other, "angle divisor"))
        if isinstance(other, AngleExpr):
            raise InputError(f"({self}) / ({other}) is not affine; divide by numbers only")
        return NotImplemented

    def __str__(self) -> str:
        parts = []
        for name, coef in self.terms:
            text = name if coef == 1 else f"-{name}" if coef == -1 else f"{coef:.17g}*{name}"
            parts.append(text)
        if self.offset or not parts:
            parts.append(f"{self.offset:.17g}")
        return " + ".join(parts).replace("+ -", "- ")


def _make(terms: Iterable[tuple[str, float]], offset: float) -> AngleExpr | float:
    """An expression from raw terms: zero coefficients dropped, a constant becomes a float."""
    kept = tuple(sorted((n, float(c) + 0.0) for n, c in terms if c != 0))
    if not kept:
        return float(offset) + 0.0
    if not all(math.isfinite(c) for _, c in kept) or not math.isfinite(offset):
        raise InputError("an angle expression overflows to a non-finite coefficient")
    return AngleExpr(kept, float(offset) + 0.0)


def angle(name: str) -> AngleExpr:
    """The angle named ``name``, as an expression (``1 * name``).

    Raises
    ------
    InputError
        If ``name`` is not an identifier, or is ``pi``.
    """
    if not isinstance(name, str) or not _NAME.match(name) or name in _RESERVED:
        raise InputError(
            f"{name!r} is not a parameter name; use a letter or '_' followed by letters, "
            "digits or '_' (and not 'pi')"
        )
    return AngleExpr(((name, 1.0),))


_TOKEN = re.compile(
    r"\s*(?:(?P<num>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)|(?P<name>[A-Za-z_π][A-Za-z0-9_]*)"
    r"|(?P<op>[-+*/()]))"
)


class _Parser:
    """Recursive descent over the grammar of affine angle expressions.

    ``sum := term (('+'|'-') term)*``, ``term := unary (('*'|'/') unary)*``,
    ``unary := ('+'|'-') unary | number | name | '(' sum ')'``.
    """

    def __init__(self, text: str):
        self.text, self.tokens, pos = text, [], 0
        while pos < len(text):
            if text[pos:].strip() == "":
                break
            m = _TOKEN.match(text, pos)
            if m is None or m.end() == pos:
                where = pos + len(text[pos:]) - len(text[pos:].lstrip())
                self.fail(where, f"unexpected character {text[where]!r}")
            kind = str(m.lastgroup)
            self.tokens.append((kind, m.group(kind), m.start(kind)))
            pos = m.end()
        self.k = 0

    def fail(self, pos: int, what: str) -> NoReturn:
        raise InputError(
            f"angle {self.text!r}, column {pos + 1}: {what}; write an affine expression "
            "such as '2*gamma0 - 0.5*beta + 0.1'"
        )

    def peek(self):
        return self.tokens[self.k] if self.k < len(self.tokens) else (None, None, len(self.text))

    def take(self):
        tok = self.peek()
        self.k += 1
        return tok

    def parse(self):
        if not self.tokens:
            self.fail(0, "empty expression")
        value = self.sum()
        kind, text, pos = self.peek()
        if kind is not None:
            self.fail(pos, f"unexpected {text!r}")
        return value

    def sum(self):
        value = self.term()
        while self.peek()[1] in ("+", "-"):
            _, op, pos = self.take()
            right = self.term()
            value = self.apply(op, value, right, pos)
        return value

    def term(self):
        value = self.unary()
        while self.peek()[1] in ("*", "/"):
            _, op, pos = self.take()
            right = self.unary()
            value = self.apply(op, value, right, pos)
        return value

    def apply(self, op: str, a, b, pos: int):
        try:
            if op == "+":
                return a + b
            if op == "-":
                return a - b
            if op == "*":
                return a * b
            if isinstance(b, AngleExpr):
                raise InputError("division by an expression of names is not affine")
            if b == 0:
                raise InputError("division by zero")
            return a / b
        except InputError as exc:
            self.fail(pos, str(exc).split(";")[0])

    def unary(self):
        kind, text, pos = self.take()
        if text in ("+", "-"):
            value = self.unary()
            return -value if text == "-" else value
        if kind == "num":
            value = float(text)
            if not math.isfinite(value):
                self.fail(pos, f"number {text[:20]} is too large")
            return value
        if kind == "name":
            return math.pi if text in _RESERVED else angle(text)
        if text == "(":
            value = self.sum()
            if self.take()[1] != ")":
                self.fail(pos, "'(' is never closed")
            return value
        self.fail(pos, "expected a number, a name or '('" if text else "expression ends early")
        return None  # pragma: no cover (fail raises)


def parse_angle(text: str) -> AngleExpr | float:
    """Parse an affine angle expression; a constant comes back as a float.

    Numbers, names, ``pi``, ``+ - * /`` and parentheses; a product of two
    expressions containing names, or a division by one, is refused.

    Examples
    --------
    >>> parse_angle("2*gamma1")
    AngleExpr(terms=(('gamma1', 2.0),), offset=0.0)
    >>> parse_angle("pi/4")
    0.7853981633974483

    Raises
    ------
    InputError
        Text that is not an affine expression (the message gives the column).
    """
    if not isinstance(text, str):
        raise InputError(f"expected the text of an angle, got {text!r}")
    return _parse_cached(text)


@functools.lru_cache(maxsize=4096)
def _parse_cached(text: str) -> AngleExpr | float:
    """Parsed expressions are immutable: circuits repeating one angle text parse it once."""
    return _Parser(text).parse()


def as_angle(value, what: str = "angle") -> AngleExpr | float:
    """Normalise a gate angle: a finite real number, an :class:`AngleExpr` or its text.

    Examples
    --------
    >>> as_angle(1), as_angle("theta"), as_angle(0 * angle("x") + 2)
    (1.0, AngleExpr(terms=(('theta', 1.0),), offset=0.0), 2.0)
    """
    if isinstance(value, AngleExpr):
        return value
    if isinstance(value, str):
        return parse_angle(value)
    return _real(value, what)


class _Probe(Mapping):
    """A value for every name, fixed and unremarkable (see :func:`probe_values`)."""

    def __init__(self, salt: int):
        self.salt = salt

    def __getitem__(self, name: str) -> float:
        h = zlib.crc32(f"{self.salt}:{name}".encode())
        return 0.3 + 2.5 * (h / 2**32) + 0.1 * math.sqrt(2) * self.salt

    def __iter__(self):
        return iter(())

    def __len__(self) -> int:
        return 0


def probe_values(salt: int) -> Mapping[str, float]:
    """A mapping that gives every name a fixed, generic angle (different for each ``salt``).

    Used to learn the structure of a gate with named angles (which of its
    qubits it never flips, whether it is symmetric) from two generic
    instances: a property that holds at two generic points holds for all
    angles of the gates tnsim knows (their entries are trigonometric
    polynomials of the angles).

    Examples
    --------
    >>> p = probe_values(1)
    >>> p["theta"] == probe_values(1)["theta"] != probe_values(2)["theta"]
    True
    """
    return _Probe(salt)
