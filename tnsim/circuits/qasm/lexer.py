"""Tokens of OpenQASM 2.0 text, with positions resolved to line and column on demand.

One compiled master regex reads a token after any blanks, newlines and ``//``
comments; a ``scanner`` over it reads token after token, anchored, and the
kind is the number of the group that matched.  A token records its offset
only; :class:`Source` turns an offset into a 1-based ``line, column`` when an
error or a gate definition needs it, counting newlines forward from the last
position asked, so positions requested in file order cost linear time in all.
"""

from __future__ import annotations

import re
from typing import NamedTuple

from tnsim.errors import QasmError

__all__ = ["SKIP", "Lexer", "Source", "Token", "canonical", "describe"]

SKIP = r"(?:\s|//[^\n]*(?![^\n]))*(?!\s|//)"
"""Regex for all blanks, newlines and ``//`` comments at a position.  It matches only the
longest run (a comment always runs to the line's end, and what follows is neither), so no
backtracking can read the inside of a comment, or its slashes, as tokens."""

_TOKEN_RE = re.compile(
    SKIP
    + r"""
    (?:
      ((?:[0-9]+\.[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[0-9]+[eE][+-]?[0-9]+)  # real
    | ([0-9]+)                                                                # int
    | ([A-Za-z_][A-Za-z0-9_]*)                                                # id
    | ("[^"\n]*")                                                             # string
    | (->|==|[;,()\[\]{}+\-*/^])                                               # sym
    | (\Z)                                                                    # eof
    )
    """,
    re.VERBOSE | re.ASCII,
)
_KINDS = (None, "real", "int", "id", "string", "sym", "eof")

MAX_TOKEN = 1024
"""Longest name, number or string read (characters): longer ones are refused at once, so a
message never echoes megabytes of one token."""
_SKIP_RE = re.compile(SKIP, re.ASCII)


class Token(NamedTuple):
    """One token: ``kind`` is "id", "int", "real", "string", "sym" or "eof"."""

    kind: str
    text: str
    offset: int


_new_token = tuple.__new__  # skips the Python-level NamedTuple constructor


class Source:
    r"""The text of one file (or string) and its name, for positions in messages.

    Examples
    --------
    >>> Source("ab\ncd", "<text>").where(4)
    (2, 2)
    """

    def __init__(self, text: str, name: str):
        if "\r" in text:  # universal newlines: line numbers as an editor shows them
            text = text.replace("\r\n", "\n").replace("\r", "\n")
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
            if self._end == len(self._text):  # the scanner stops after matching the end
                self.seek(self._end)
                return self.next()
            skipped = _SKIP_RE.match(self._text, self._end)  # matches the empty string too
            raise self._bad_character(skipped.end() if skipped else self._end)
        self._end = match.end()
        group = match.lastindex
        if match.end(group) - match.start(group) > MAX_TOKEN:
            raise self._too_long(match.start(group), match.end(group))
        return _new_token(Token, (_KINDS[group], match.group(group), match.start(group)))

    def _too_long(self, start: int, end: int) -> QasmError:
        head = self._text[start : start + 20]
        return self.source.error(
            f"a name, number or string of {end - start} characters ('{head}...'); tnsim reads "
            f"at most {MAX_TOKEN} characters per token",
            start,
        )

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
