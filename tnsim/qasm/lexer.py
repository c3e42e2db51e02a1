"""Tokens of OpenQASM 2.0 text, with positions resolved to line and column on demand.

One compiled master regex reads a token (after any blanks, newlines and ``//``
comments) at a given offset.  A token records its offset only; :class:`Source`
turns an offset into a 1-based ``line, column`` when an error or a gate
definition needs it, counting newlines forward from the last position asked,
so positions requested in file order cost linear time in all.
"""

from __future__ import annotations

import re
from typing import NamedTuple

from ..errors import QasmError

__all__ = ["Token", "Source", "Lexer", "describe", "canonical"]

_TOKEN_RE = re.compile(
    r"""
    (?:\s|//[^\n]*)*
    (?:
      (?P<real>(?:[0-9]+\.[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[0-9]+[eE][+-]?[0-9]+)
    | (?P<int>[0-9]+)
    | (?P<id>[A-Za-z_][A-Za-z0-9_]*)
    | (?P<string>"[^"\n]*")
    | (?P<sym>->|==|[;,()\[\]{}+\-*/^])
    | (?P<eof>\Z)
    )
    """,
    re.VERBOSE | re.ASCII,
)
_SKIP_RE = re.compile(r"(?:\s|//[^\n]*)*", re.ASCII)


class Token(NamedTuple):
    """One token: ``kind`` is "id", "int", "real", "string", "sym" or "eof"."""

    kind: str
    text: str
    offset: int


class Source:
    """The text of one file (or string) and its name, for positions in messages.

    Examples
    --------
    >>> Source("ab\\ncd", "<text>").where(4)
    (2, 2)
    """

    def __init__(self, text: str, name: str):
        self.text, self.name = text, name
        self._mark, self._line = 0, 1

    def where(self, offset: int) -> tuple[int, int]:
        """Return the 1-based line and column of ``offset``."""
        text = self.text
        if offset >= self._mark:
            line = self._line + text.count("\n", self._mark, offset)
        else:
            line = text.count("\n", 0, offset) + 1
        self._mark, self._line = offset, line
        return line, offset - text.rfind("\n", 0, offset)

    def error(self, message: str, offset: int) -> QasmError:
        """A :class:`~tnsim.errors.QasmError` at ``offset``."""
        return QasmError(message, self.name, *self.where(offset))


class Lexer:
    """Reads tokens of ``source`` one at a time; :meth:`seek` moves to any offset."""

    def __init__(self, source: Source):
        self.source, self.pos = source, 0
        self._match, self._text = _TOKEN_RE.match, source.text

    def seek(self, pos: int) -> None:
        """Continue reading at offset ``pos``."""
        self.pos = pos

    def next(self) -> Token:
        """Return the next token (an ``eof`` token at the end, again and again)."""
        match = self._match(self._text, self.pos)
        if match is None:
            raise self._bad_character(_SKIP_RE.match(self._text, self.pos).end())
        kind = match.lastgroup
        start, self.pos = match.start(kind), match.end()
        return Token(kind, self._text[start : self.pos], start)

    def _bad_character(self, offset: int) -> QasmError:
        char = self._text[offset]
        if char == '"':
            return self.source.error(
                "unterminated string; close it with '\"' on the same line", offset
            )
        return self.source.error(
            f"unexpected character {char!r}; remove it (OpenQASM 2.0 statements use ASCII "
            "letters, digits, '_' and ; , ( ) [ ] { } + - * / ^ ->)",
            offset,
        )


def describe(tok: Token) -> str:
    """How a message names ``tok``."""
    if tok.kind == "eof":
        return "the end of the file"
    return f"'{tok.text}'" if len(tok.text) <= 40 else f"'{tok.text[:37]}...'"


def canonical(text: str) -> tuple[tuple[str, str], ...]:
    """The ``(kind, text)`` pairs of ``text``: equal for texts differing only in blanks.

    Examples
    --------
    >>> canonical("rz(pi) a;  // turn") == canonical("rz ( pi )a ;")
    True
    """
    lexer, pairs = Lexer(Source(text, "<definition>")), []
    while (tok := lexer.next()).kind != "eof":
        pairs.append((tok.kind, tok.text))
    return tuple(pairs)
