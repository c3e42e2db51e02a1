"""Telling a file name from program text, and reading program files."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from tnsim.circuits.qasm.lexer import Source, Token
from tnsim.errors import InputError, QasmError

__all__ = [
    "MAX_INCLUDE_DEPTH",
    "IncludeRefused",
    "IncludesBeside",
    "include_path",
    "looks_like_missing_file",
    "names_file",
    "read_text",
]

MAX_INCLUDE_DEPTH = 8
"""Deepest allowed chain of included files."""


def read_text(path: Path) -> str:
    """The UTF-8 text of ``path`` (a byte-order mark is dropped)."""
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read '{path}': {exc.strerror or exc}; check the path") from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        column = exc.start - (data.rfind(b"\n", 0, exc.start) + 1) + 1
        raise QasmError("the file is not UTF-8 text", str(path), line, column) from None


class IncludeRefused(Exception):
    """An include that cannot be read; the reader reports it at the include's position."""


def include_path(directory: Path | None, filename: str, builtin: str) -> Path:
    """The real path of the include ``filename`` beside the circuit file in ``directory``.

    Only a plain file name of a file in that very folder is accepted, links
    resolved before the check (a link leading elsewhere is refused); program
    text read from a string (``directory`` ``None``) includes nothing but the
    built-in library ``builtin``.  Raises :class:`IncludeRefused` with what to
    do.  One rule for the OpenQASM 2.0 and 3 readers.
    """
    if directory is None:
        raise IncludeRefused(
            f"cannot include '{filename}' when reading text: only {builtin} is built in; "
            "read the program from a file with the include beside it, or paste the gate "
            "definitions into the program"
        )
    if not filename or filename in (".", "..") or any(c in filename for c in "/\\\0:"):
        raise IncludeRefused(
            f"include '{filename}' must be a plain file name of a file beside the circuit "
            "file (no directories)"
        )
    folder = Path(os.path.realpath(directory))
    path = Path(os.path.realpath(directory / filename))
    if not path.is_file():
        raise IncludeRefused(
            f"include file '{filename}' not found beside the circuit file (looked in "
            f"{folder}); only {builtin} is built in"
        )
    if path.parent != folder:
        raise IncludeRefused(
            f"include '{filename}' is a link to a file outside the circuit's folder (links "
            "leading elsewhere are not followed); copy the file beside the circuit file"
        )
    return path


class IncludesBeside:
    """Reading ``include "file";`` for a statement parser of either language version.

    Mixed into a reader's parser, whose constructor takes ``(source, directory,
    program)`` and whose ``parse(main=False)`` reads an included file's
    definitions; :attr:`BUILTIN` names the library that needs no file.
    """

    BUILTIN = ""
    directory: Path | None
    program: Any
    error: Any

    def include_file(self, filename: str, tok: Token) -> None:
        """Read the definitions of a file beside the circuit file."""
        path = self.resolve_include(filename, tok)
        key = str(path)
        if key in self.program.include_stack:
            raise self.error(f"'{filename}' includes itself (directly or indirectly)", tok)
        if len(self.program.include_stack) >= MAX_INCLUDE_DEPTH:
            raise self.error(f"includes nest deeper than {MAX_INCLUDE_DEPTH} files", tok)
        try:
            text = read_text(path)
        except InputError as exc:
            raise self.error(f"cannot include '{filename}': {exc}", tok) from None
        self.program.include_stack.append(key)
        reader: Any = type(self)  # the reader's parser: (source, directory, program)
        reader(Source(text, key), path.parent, self.program).parse(main=False)
        self.program.include_stack.pop()

    def resolve_include(self, filename: str, tok: Token) -> Path:
        """The real path of an include beside the circuit file (see :func:`include_path`)."""
        try:
            return include_path(self.directory, filename, self.BUILTIN)
        except IncludeRefused as exc:
            raise self.error(str(exc), tok) from None


def names_file(text: str) -> bool:
    """Whether the string ``text`` is the name of an existing file (not program text)."""
    if "\n" in text or "OPENQASM" in text or "\0" in text or not text.strip():
        return False
    try:
        return os.path.isfile(text)
    except (OSError, ValueError):
        return False


def looks_like_missing_file(text: str) -> bool:
    """Whether ``text`` looks like a file name rather than program text.

    Examples
    --------
    >>> looks_like_missing_file("circuits/ghz.qasm"), looks_like_missing_file("OPENQASM 2.0;")
    (True, False)
    """
    stripped = text.strip()
    return bool(stripped) and not any(c in stripped for c in ";\n\0 \t") and "." in stripped
