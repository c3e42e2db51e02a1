"""Telling a file name from program text, and reading program files."""

from __future__ import annotations

import os
from pathlib import Path

from tnsim.errors import InputError, QasmError

__all__ = ["looks_like_missing_file", "names_file", "read_text"]


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
