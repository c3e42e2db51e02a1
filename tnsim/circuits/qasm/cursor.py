"""The token cursor both OpenQASM readers (2.0 and 3) parse with.

A leaf of the reading code: the statement parsers of :mod:`tnsim.circuits.qasm`
and :mod:`tnsim.circuits.qasm3` build on :class:`TokenCursor`, each with its own
lexer (:attr:`TokenCursor.LEXER`) and its own checks of names and gates.
"""

from __future__ import annotations

from typing import Any

from tnsim.circuits.qasm.lexer import Lexer, Source, Token, describe
from tnsim.errors import QasmError

__all__ = ["TokenCursor"]


class TokenCursor:
    """The current token of one file (or text) read into ``program``, and the moves on it.

    ``recording``, when a list, receives ``(kind, text)`` of every token consumed
    (gate bodies are kept as their tokens).
    """

    LEXER: Any = Lexer
    """The lexer class of the language version (called with the :class:`Source`)."""

    def __init__(self, source: Source, program: Any):
        self.source, self.program = source, program
        self.lexer = self.LEXER(source)
        self.tok: Token = self.lexer.next()
        self.recording: list[tuple[str, str]] | None = None

    def advance(self) -> Token:
        """Return the current token and move to the next one."""
        tok = self.tok
        if self.recording is not None:
            self.recording.append((tok.kind, tok.text))
        if tok.kind != "eof":
            self.tok = self.lexer.next()
        return tok

    def error(self, message: str, tok: Token | None = None) -> QasmError:
        """A :class:`QasmError` located at ``tok`` (default: the current token)."""
        tok = self.tok if tok is None else tok
        return self.source.error(message, tok.offset)

    def at(self, text: str) -> bool:
        """Whether the current token's text is ``text`` (a symbol or a word)."""
        return self.tok.text == text and self.tok.kind in ("sym", "id")

    def expect(self, text: str, context: str = "") -> Token:
        """Consume a token whose text is ``text``, or raise an error naming ``context``."""
        if not self.at(text):
            hint = " (every statement ends with ';')" if text == ";" else ""
            where = f" {context}" if context else ""
            raise self.error(f"expected '{text}'{where}, found {describe(self.tok)}{hint}")
        return self.advance()

    def expect_id(self, what: str) -> Token:
        """Consume an identifier token, or raise an error naming ``what``."""
        if self.tok.kind != "id":
            raise self.error(f"expected {what}, found {describe(self.tok)}")
        return self.advance()

    def formal_args(self, formal: dict[str, int], owner: str) -> list[Token]:
        """Parse the qubit arguments of a call inside a gate body."""
        args = []
        while True:
            tok = self.expect_id(f"a qubit argument of gate '{owner}'")
            if tok.text not in formal:
                raise self.error(
                    f"'{tok.text}' is not a qubit argument of gate '{owner}' "
                    f"(its arguments: {', '.join(formal)})",
                    tok,
                )
            if self.at("["):
                raise self.error(
                    "qubit arguments inside a gate body are the gate's own names, without indices"
                )
            args.append(tok)
            if not self.at(","):
                return args
            self.advance()
