"""Observables: real-weighted sums of Pauli strings, and their text form.

Text form (whitespace is free between items)::

    0.5 Z0 Z1 - 1.2 X3 + 0.7
    Z0*Z1 + Z1*Z2
    -2e-3 X0 Y1 Z5

A term is an optional real coefficient (default 1; ``*`` after it is
optional) followed by Pauli factors: a letter ``X``, ``Y`` or ``Z`` (or
lower-case) immediately followed by a qubit index; factors may be separated by
spaces or ``*``.  ``I`` (or ``I3``) or a bare number is the identity.  Terms are joined by
``+`` or ``-``.  A qubit may appear at most once per term.
"""

from __future__ import annotations

import math
import numbers
import re
from collections.abc import Mapping
from dataclasses import dataclass

from tnsim.errors import InputError
from tnsim.validate import quote, real_number, sequence

__all__ = ["Observable", "PauliTerm", "parse_observable"]


@dataclass(frozen=True)
class PauliTerm:
    """``coefficient * P_{q1} P_{q2} ...``.

    Attributes
    ----------
    coefficient : float
        Real weight.
    paulis : tuple of (int, str)
        ``(qubit, letter)`` pairs sorted by qubit; empty for the identity.
    """

    coefficient: float
    paulis: tuple[tuple[int, str], ...]

    def __str__(self) -> str:
        factors = " ".join(f"{p}{q}" for q, p in self.paulis)
        return f"{self.coefficient:g} {factors}".strip()


@dataclass(frozen=True)
class Observable:
    """A real-weighted sum of Pauli strings.

    Attributes
    ----------
    terms : tuple of PauliTerm
        The terms, in the order written.
    """

    terms: tuple[PauliTerm, ...]

    def max_qubit(self) -> int:
        """Largest qubit index used (-1 if the observable is a constant)."""
        return max((q for t in self.terms for q, _ in t.paulis), default=-1)

    def __str__(self) -> str:
        return " + ".join(str(t) for t in self.terms).replace("+ -", "- ")


MAX_INDEX_DIGITS = 18
"""Qubit indices have at most this many digits (ASCII only)."""

_TOKEN = re.compile(
    r"\s*(?:(?P<num>(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)"
    r"|(?P<pauli>[XYZxyz])(?P<qubit>[0-9]+)"
    r"|(?P<ident>[Ii][0-9]*)"
    r"|(?P<sign>[+-])|(?P<star>\*)|(?P<bad>\S))"
)


def _error(text: str, col: int, what: str) -> InputError:
    shown = repr(text) if len(text) <= 80 else repr(text[:77]) + "..."
    return InputError(
        f"observable, column {col}: {what} in {shown}; write terms like '0.5 Z0 Z1 - 1.2 X3 + 0.7'"
    )


def _tokens(text: str) -> list[tuple[str, str, int]]:
    out, pos = [], 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if m is None or m.end() == pos:
            break
        group = m.lastgroup or "bad"  # one of the alternatives matched: never None
        kind = group if group != "qubit" else "pauli"
        col = m.start(kind) + 1
        if kind == "bad":
            bad = m.group("bad")
            if bad in "XYZxyz":
                raise _error(text, col, f"{bad!r} must be followed by a qubit index (digits 0-9)")
            raise _error(text, col, f"unexpected character {bad!r}")
        value = m.group(kind) + (m.group("qubit") if kind == "pauli" else "")
        out.append((kind, value, col))
        pos = m.end()
    return out


def _parse_text(text: str) -> Observable:
    toks = _tokens(text)
    if not toks:
        raise _error(text, 1, "empty observable")
    terms: list[PauliTerm] = []
    k = 0
    while k < len(toks):
        sign = 1.0
        if toks[k][0] == "sign":
            sign = -1.0 if toks[k][1] == "-" else 1.0
            k += 1
        elif terms:
            raise _error(text, toks[k][2], f"expected '+' or '-' before {toks[k][1]!r}")
        start_col = toks[k][2] if k < len(toks) else len(text) + 1
        coef, factors, seen_any = 1.0, {}, False
        if k < len(toks) and toks[k][0] == "num":
            coef = float(toks[k][1])
            if not math.isfinite(coef):
                raise _error(text, toks[k][2], f"coefficient {toks[k][1]!r} is not finite")
            k += 1
            seen_any = True
            if k < len(toks) and toks[k][0] == "star":
                if k + 1 >= len(toks) or toks[k + 1][0] not in ("pauli", "ident"):
                    raise _error(text, toks[k][2], "'*' must be followed by a Pauli factor")
                k += 1
        while k < len(toks) and toks[k][0] in ("pauli", "ident", "star"):
            kind, value, col = toks[k]
            k += 1
            if kind == "star":
                if k >= len(toks) or toks[k][0] not in ("pauli", "ident"):
                    raise _error(text, col, "'*' must be followed by a Pauli factor")
                continue
            seen_any = True
            if kind == "pauli":
                if len(value) > MAX_INDEX_DIGITS + 1:
                    raise _error(text, col, f"qubit index {value[1:21]!r}... is too large")
                q = int(value[1:])
                if q in factors:
                    raise _error(text, col, f"qubit {q} appears twice in one term")
                factors[q] = value[0].upper()
        if not seen_any:
            raise _error(text, start_col, "expected a coefficient or a Pauli factor")
        if k < len(toks) and toks[k][0] not in ("sign",):
            raise _error(text, toks[k][2], f"unexpected {toks[k][1]!r}")
        terms.append(PauliTerm(sign * coef, tuple(sorted(factors.items()))))
    return Observable(tuple(terms))


def _from_mapping(spec: Mapping) -> Observable:
    factors = {}
    for q, letter in spec.items():
        if isinstance(q, bool) or not isinstance(q, numbers.Integral) or q < 0:
            raise InputError(f"observable: qubit {quote(q)} is not a non-negative integer")
        if not isinstance(letter, str) or letter.upper() not in ("X", "Y", "Z", "I"):
            raise InputError(f"observable: qubit {q} has {quote(letter)}; use 'X', 'Y', 'Z' or 'I'")
        if letter.upper() != "I":
            factors[int(q)] = letter.upper()
    return Observable((PauliTerm(1.0, tuple(sorted(factors.items()))),))


def _checked(obs: Observable) -> Observable:
    """An Observable built by hand, checked term by term as the text reader checks."""
    terms = obs.terms
    if not isinstance(terms, (tuple, list)) or not terms:
        raise InputError("an Observable needs at least one PauliTerm")
    out = []
    for k, term in enumerate(terms):
        if not isinstance(term, PauliTerm):
            raise InputError(f"observable term {k} is not a PauliTerm: {quote(term)}")
        coefficient = real_number(term.coefficient, f"observable term {k}: the coefficient")
        paulis = sequence(term.paulis, f"observable term {k}: the Pauli factors")
        seen = set()
        for item in paulis:
            if not (isinstance(item, (tuple, list)) and len(item) == 2):
                raise InputError(f"observable term {k}: factor {quote(item)} is not (qubit, 'Z')")
            q, letter = item
            if isinstance(q, bool) or not isinstance(q, numbers.Integral) or q < 0 or q in seen:
                raise InputError(
                    f"observable term {k}: qubit {quote(q)} is not a non-negative integer "
                    "given once"
                )
            if letter not in ("X", "Y", "Z"):
                raise InputError(f"observable term {k}: {quote(letter)} is not 'X', 'Y' or 'Z'")
            seen.add(q)
        factors = tuple(sorted((int(q), letter) for q, letter in paulis))
        out.append(PauliTerm(coefficient, factors))
    return Observable(tuple(out))


def parse_observable(
    spec: str | Mapping[int, str] | Observable, num_qubits: int | None = None
) -> Observable:
    """Read an observable from text, a ``{qubit: letter}`` mapping, or pass one through.

    Parameters
    ----------
    spec : str or mapping or Observable
        Text form (see the module documentation) or one Pauli string as a
        mapping ``{qubit: "X" | "Y" | "Z"}``.
    num_qubits : int, optional
        If given, every qubit index must be below it.

    Returns
    -------
    Observable

    Raises
    ------
    InputError
        Malformed text (the message gives the column) or a qubit out of range.

    Examples
    --------
    >>> obs = parse_observable("0.5 Z0 Z1 - 1.2 X3 + 0.7")
    >>> [(t.coefficient, t.paulis) for t in obs.terms]
    [(0.5, ((0, 'Z'), (1, 'Z'))), (-1.2, ((3, 'X'),)), (0.7, ())]
    >>> parse_observable({2: "Y"}).terms[0].paulis
    ((2, 'Y'),)
    """
    if isinstance(spec, Observable):
        obs = _checked(spec)
    elif isinstance(spec, str):
        obs = _parse_text(spec)
    elif isinstance(spec, Mapping):
        obs = _from_mapping(spec)
    else:
        raise InputError(
            f"observable must be text like 'Z0 Z1' or a mapping {{qubit: 'Z'}}, "
            f"got {type(spec).__name__}"
        )
    if num_qubits is not None and obs.max_qubit() >= num_qubits:
        raise InputError(
            f"observable acts on qubit {obs.max_qubit()} but the circuit has {num_qubits} "
            f"qubit(s) (valid: 0..{num_qubits - 1})"
        )
    return obs
