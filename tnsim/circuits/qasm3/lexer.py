"""Tokens of OpenQASM 3 text.

One compiled master regex reads a token after any blanks, ``//`` line
comments and ``/* */`` block comments, like the 2.0 lexer
(:mod:`tnsim.circuits.qasm.lexer`, whose :class:`~tnsim.circuits.qasm.lexer.Source`
and :class:`~tnsim.circuits.qasm.lexer.Token` this module reuses).  OpenQASM 3
adds tokens the 2.0 lexer does not know: Unicode identifiers (``θ``, ``π``),
hardware qubits (``$3``), integer literals in hexadecimal, octal and binary with
``_`` separators, duration literals (``100ns``) and imaginary literals
(``1.5im``), and the operators of classical expressions (``** % == <= && <<``
and the like).  Tokens the reader refuses are still read as tokens, so that the
refusal can name the construct and its position.
"""

from __future__ import annotations

import re

from tnsim.circuits.qasm.lexer import Source, Token
from tnsim.errors import QasmError

__all__ = ["SKIP", "Lexer", "canonical"]

_BLOCK = r"/\*(?:[^*]|\*+[^*/])*\*+/"
SKIP = rf"(?:\s|//[^\n]*(?![^\n])|{_BLOCK})*(?!\s|//|/\*)"
"""Regex for all blanks, line comments and block comments at a position.  It matches only
the longest run (a line comment runs to the line's end, a block comment to its first
``*/``, and what follows is neither), so backtracking never reads a comment as tokens."""

_SKIP_LOOSE = re.compile(rf"(?:\s|//[^\n]*|{_BLOCK})*")
_UNITS = r"(?:dt|ns|us|µs|ms|s)"
_REAL = r"(?:[0-9][0-9_]*\.[0-9_]*|\.[0-9][0-9_]*)(?:[eE][+-]?[0-9]+)?|[0-9][0-9_]*[eE][+-]?[0-9]+"
_INT = r"0[xX][0-9a-fA-F_]+|0[oO][0-7_]+|0[bB][01_]+|[0-9][0-9_]*"
_SYMBOLS = (
    r"\*\*=|<<=|>>=|->|==|!=|<=|>=|<<|>>|&&|\|\||\+\+|\*\*|[-+*/%&|^~]="
    r"|[;,()\[\]{}+\-*/%^&|~!<>=:@.#]"
)
_TOKEN_RE = re.compile(
    SKIP
    + rf"""
    (?:
      ((?:{_REAL}|{_INT}){_UNITS}(?![\w]))                      # duration
    | ((?:{_REAL}|{_INT})[ \t]*im(?![\w]))                            # imaginary
    | ({_REAL})                                                    # real
    | ({_INT})                                                     # int
    | ([^\W\d]\w*)                                                 # id
    | (\$[0-9]+)                                                   # hardware qubit
    | ("[^"\n]*"|'[^'\n]*')                                        # string
    | ({_SYMBOLS})                                                 # sym
    | (\Z)                                                         # eof
    )
    """,
    re.VERBOSE,
)
_KINDS = (None, "duration", "imaginary", "real", "int", "id", "hwq", "string", "sym", "eof")
_new_token = tuple.__new__


class Lexer:
    """Reads OpenQASM 3 tokens of ``source`` one at a time.

    Examples
    --------
    >>> lexer = Lexer(Source("rz(θ/2) $0; /* note */ x q[0x1_0];", "<text>"))
    >>> [lexer.next().text for _ in range(12)]
    ['rz', '(', 'θ', '/', '2', ')', '$0', ';', 'x', 'q', '[', '0x1_0']
    """

    def __init__(self, source: Source):
        self.source, self._text = source, source.text
        self.seek(0)

    def seek(self, pos: int) -> None:
        """Continue reading at offset ``pos``."""
        # Pattern.scanner: CPython's undocumented incremental matcher (no typeshed stub)
        scanner = _TOKEN_RE.scanner(self._text, pos)  # type: ignore[attr-defined]
        self._end, self._scan = pos, scanner.match

    def next(self) -> Token:
        """Return the next token (an ``eof`` token at the end, again and again)."""
        match = self._scan()
        if match is None:
            if self._end == len(self._text):
                self.seek(self._end)
                return self.next()
            skipped = _SKIP_LOOSE.match(self._text, self._end)  # always matches (maybe empty)
            raise self._bad_character(skipped.end() if skipped else self._end)
        self._end = match.end()
        group = match.lastindex
        text = match.group(group)
        kind = _KINDS[group]
        if kind == "id" and not text.isidentifier():
            raise self._bad_identifier(text, match.start(group))
        return _new_token(Token, (kind, text, match.start(group)))

    def _bad_identifier(self, text: str, offset: int) -> QasmError:
        bad = next(k for k in range(1, len(text) + 1) if not text[:k].isidentifier())
        return self._bad_character(offset + bad - 1)

    def _bad_character(self, offset: int) -> QasmError:
        text = self._text
        if text.startswith("/*", offset):
            return self.source.error("unterminated block comment; close it with '*/'", offset)
        char = text[offset]
        if char in "\"'":
            return self.source.error(
                f"unterminated string; close it with {char!r} on the same line", offset
            )
        return self.source.error(
            f"unexpected character {char!r}; remove it (OpenQASM 3 names are letters, digits "
            "and '_', numbers are decimal, 0x, 0o or 0b literals)",
            offset,
        )


def canonical(text: str) -> tuple[tuple[str, str], ...]:
    """The ``(kind, text)`` pairs of ``text``: equal for texts differing only in blanks.

    Examples
    --------
    >>> canonical("gate g a { x a; } /* c */") == canonical("gate g a{x a;}")
    True
    """
    lexer, pairs = Lexer(Source(text, "<definition>")), []
    while (tok := lexer.next()).kind != "eof":
        pairs.append((tok.kind, tok.text))
    return tuple(pairs)
